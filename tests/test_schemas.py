"""Every --json output and report file names a JSON Schema shipped in the package, and validates against it.

The validator is the general-purpose `jsonschema` package (JSON Schema draft 2020-12), not iqsift code.
"""

from __future__ import annotations

import json
from pathlib import Path

import jsonschema
import pytest

from iqsift import __version__
from iqsift.schemas import SCHEMA_NAMES, load_schema

SAMPLES = Path(__file__).resolve().parents[1] / "sample_captures"
VHF = SAMPLES / "vhf_airband.sigmf-meta"
HF = SAMPLES / "hf_segment.sigmf-meta"


def validate(document: dict) -> None:
    """The document names its schema and version, and is valid against that schema (draft 2020-12)."""
    assert document["iqsift_version"] == __version__
    schema = load_schema(document["schema"])
    jsonschema.Draft202012Validator(schema, format_checker=jsonschema.FormatChecker()).validate(document)


@pytest.mark.parametrize("name", SCHEMA_NAMES)
def test_every_shipped_schema_is_a_valid_draft_2020_12_schema(name):
    schema = load_schema(name)
    assert schema["$schema"] == "https://json-schema.org/draft/2020-12/schema"
    jsonschema.Draft202012Validator.check_schema(schema)
    assert schema["properties"]["schema"]["const"] == name


@pytest.fixture(scope="module")
def outputs(tmp_path_factory):
    """Run every command once on the sample captures; collect the JSON it printed and the reports it wrote."""
    from iqsift.cli import main
    import contextlib
    import io

    out = tmp_path_factory.mktemp("schemas")
    docs: dict[str, list[dict]] = {}

    def run(key: str, *args: object) -> None:
        buf = io.StringIO()
        with contextlib.redirect_stdout(buf):
            status = main([str(a) for a in args])
        assert status == 0, (key, args)
        docs.setdefault(key, []).append(json.loads(buf.getvalue()))

    run("info", "info", VHF, "--json")
    run("info", "info", HF, "--json")
    run("design", "design", "--rate", "1.92M", "-e", "6K00A3E", "--offset", "200k", "--json")
    run("design", "design", "--rate", "240k", "-e", "2K70J3E", "--engine", "polyphase", "--json")
    run("survey", "survey", VHF, "--raster", "8.33k", "--plan-out", out / "vhf.toml", "--json")
    run("survey", "survey", HF, "--json")
    run("demod", "demod", VHF, "--freq", "124.0916667M", "-e", "6K00A3E", "-o", out / "a.wav",
        "--report", out / "a.json", "--baseband", out / "a.sigmf-meta", "--json", "-q")
    run("demod", "demod", HF, "--offset", "0", "-e", "2K70J3E", "--engine", "polyphase", "-o", out / "b.wav",
        "--json", "-q")
    run("demod", "demod", HF, "--offset", "0", "-m", "usb", "-b", "2.7k", "-o", out / "c.wav", "--json", "-q")
    run("measure", "measure", VHF, "--freq", "124.0916667M", "-e", "6K00A3E", "--json", "-q")
    run("measure", "measure", HF, "--offset", "0", "-e", "2K70J3E", "--json", "-q")
    run("extract", "extract", VHF, "--plan", out / "vhf.toml", "--out-dir", out / "vhf", "--json", "-q")
    run("synth", "synth", SAMPLES / "hf_segment.toml", "-o", out / "s.sigmf-meta", "--json", "-q")
    docs["demod report file"] = [json.loads((out / "a.json").read_text())]
    docs["extract report.json"] = [json.loads((out / "vhf" / "report.json").read_text())]
    return docs


@pytest.mark.parametrize("key, schema", [
    ("info", "info-v1"), ("design", "design-v1"), ("survey", "survey-v1"), ("demod", "demod-v1"),
    ("measure", "measure-v1"), ("extract", "extract-v1"), ("synth", "synth-v1"),
    ("demod report file", "demod-v1"), ("extract report.json", "extract-v1"),
])
def test_json_of_every_command_validates_against_the_schema_it_names(outputs, key, schema):
    for document in outputs[key]:
        assert document["schema"] == schema
        validate(document)


def test_a_document_that_breaks_its_schema_is_refused(outputs):
    """The schemas constrain: a missing required key or a wrong type fails validation."""
    good = outputs["measure"][0]
    missing = {k: v for k, v in good.items() if k != "channel"}
    with pytest.raises(jsonschema.ValidationError):
        validate(missing)
    wrong = json.loads(json.dumps(good))
    wrong["channel"]["mode"] = "fm"
    with pytest.raises(jsonschema.ValidationError):
        validate(wrong)
