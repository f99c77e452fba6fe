"""`iqsift batch --iq-correct --annotate --html`: each capture's folder holds what `iqsift extract` writes with
the same options, listed with its SHA-256 in batch.jsonl and carried through --resume and --split-seconds.

Outside references: the `sigmf` package (SigMF specification v1.2 as its validator implements it) reads the
annotated metadata; Python's hashlib gives the SHA-256 of every listed output; jsonschema validates the
batch-v1 documents. Tests start their own two-worker cluster on 127.0.0.1 and stop it.
"""

from __future__ import annotations

import hashlib
import json
import os
import shutil
import warnings
from pathlib import Path

import jsonschema
import numpy as np
import pytest
import sigmf
import soundfile as sf

from iqsift.cli import main
from iqsift.jobs import batch_files, extract_file
from iqsift.schemas import load_schema

from .conftest import comparable

SAMPLES = Path(__file__).resolve().parents[1] / "sample_captures"
VHF_PLAN = "".join(f'[[channel]]\nname = "{n}"\nchannel_name = "{c}"\nemission = "6K00A3E"\n\n'
                   for n, c in (("north-ground", "124.030"), ("weak", "124.035"), ("apron", "124.090")))
HF_PLAN = ('[[channel]]\nname = "lsb"\nfreq = "7.127978M"\nemission = "2K70J3E"\nmode = "lsb"\n\n'
           '[[channel]]\nname = "am"\nfreq = "7.185M"\nemission = "8K00A3E"\n')
STEMS = ("vhf_airband", "hf_segment")


@pytest.fixture(scope="module")
def inputs(tmp_path_factory):
    """The two sample captures copied (so extract's annotations can sit beside their data) and their plans."""
    folder = tmp_path_factory.mktemp("captures")
    for stem in STEMS:
        for suffix in (".sigmf-meta", ".sigmf-data"):
            shutil.copyfile(SAMPLES / f"{stem}{suffix}", folder / f"{stem}{suffix}")
    (folder / "vhf_airband.toml").write_text(VHF_PLAN)
    (folder / "hf_segment.toml").write_text(HF_PLAN)
    return [(folder / f"{s}.sigmf-meta", folder / f"{s}.toml") for s in STEMS]


@pytest.fixture(scope="module")
def reference(inputs, tmp_path_factory):
    """Each capture through `extract --iq-correct --html --annotate` in this process."""
    out = tmp_path_factory.mktemp("reference")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # clipped samples between transmissions: expected of these captures
        for capture, plan in inputs:
            stem = capture.name.split(".")[0]
            extract_file(capture, plan, out / stem, iq_correct=True, html=True,
                         annotate=capture.with_name(f"{stem}.extract.sigmf-meta"))
    return out


@pytest.fixture(scope="module")
def batch(inputs, client, tmp_path_factory):
    """The captures through `batch --iq-correct --html --annotate` on the cluster."""
    out = tmp_path_factory.mktemp("batch") / "run"
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        result = batch_files(inputs, None, out, client=client, iq_correct=True, html=True, annotate=True)
    return out, result


def validated(path: Path) -> sigmf.SigMFFile:
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        handle = sigmf.fromfile(str(path))
        handle.validate()  # SigMF v1.2 schema, as the sigmf package implements it
    return handle


def test_batch_writes_what_extract_writes_with_the_same_options(batch, inputs, reference):
    out, result = batch
    jsonschema.Draft202012Validator(load_schema("batch-v1")).validate(result.to_dict())
    assert not result.failed
    for (capture, _), stem in zip(inputs, STEMS):
        got, want = out / stem, reference / stem
        annotated = f"{stem}.annotated.sigmf-meta"
        assert sorted(p.name for p in got.iterdir()) == sorted([*(p.name for p in want.iterdir()), annotated])
        for wav in sorted(want.glob("*.wav")):  # audio: the same IQ correction gives the same samples
            a, b = sf.read(got / wav.name, dtype="int16")[0], sf.read(wav, dtype="int16")[0]
            assert a.shape == b.shape and a.size > 0 and np.array_equal(a, b), wav.name
        got_report = json.loads((got / "report.json").read_text())
        want_report = json.loads((want / "report.json").read_text())
        assert got_report["capture"]["iq_correction"] is not None
        assert comparable({**got_report, "outputs": {}}) == comparable({**want_report, "outputs": {}})
        assert got_report["outputs"]["html"] == str(got / "report.html")  # the final folder, not staging
        assert got_report["outputs"]["annotations"] == str(got / annotated)

        # --html: the same page and figures, apart from the capture's path in its summary table
        page = (got / "report.html").read_text().replace(str(capture), capture.name)
        assert page == (want / "report.html").read_text().replace(str(capture), capture.name)
        figures = sorted(p.name for p in (want / "report_files").iterdir())
        assert figures and sorted(p.name for p in (got / "report_files").iterdir()) == figures
        for name in figures:
            if name.endswith(".json"):
                assert (got / "report_files" / name).read_bytes() == (want / "report_files" / name).read_bytes()

        # --annotate: extract's document, metadata-only where extract names the data file beside it
        ours = validated(got / annotated)
        assert ours.get_global_field("core:metadata_only") is True and ours.data_file is None
        theirs = json.loads(capture.with_name(f"{stem}.extract.sigmf-meta").read_text())
        doc = json.loads((got / annotated).read_text())
        assert theirs["global"].pop("core:dataset") == f"{stem}.sigmf-data"
        assert doc["global"].pop("core:metadata_only") is True
        assert json.dumps(doc) == json.dumps(theirs)  # byte-equal JSON, annotations included
        notes = [a for a in doc["annotations"] if a.get("core:generator", "").startswith("iqsift ")
                 and a["core:generator"] != "iqsift synth"]
        assert len(notes) == sum(len(c["activity"]) for c in want_report["channels"]) > 0


def test_batch_log_lists_the_new_outputs_with_their_sha256(batch):
    out, _ = batch
    line_schema = load_schema("batch-v1")["properties"]["captures"]["items"]
    for line, stem in zip((json.loads(t) for t in (out / "batch.jsonl").read_text().splitlines()), STEMS):
        jsonschema.Draft202012Validator(line_schema).validate(line)
        assert line["options"]["iq_correct"] is line["options"]["annotate"] is line["options"]["html"] is True
        files = sorted(str(p.relative_to(out)) for p in (out / stem).rglob("*") if p.is_file())
        assert [o["path"] for o in line["outputs"]] == files
        assert {f"{stem}/report.html", f"{stem}/{stem}.annotated.sigmf-meta"} <= set(files)
        assert any(f.startswith(f"{stem}/report_files/") for f in files)
        for o in line["outputs"]:
            assert o["sha256"] == hashlib.sha256((out / o["path"]).read_bytes()).hexdigest()  # hashlib: FIPS 180-4


def test_resume_keeps_intact_captures_and_redoes_one_whose_extra_output_went(batch, inputs, client):
    out, _ = batch
    before = (out / "batch.jsonl").read_text().splitlines()
    kept = batch_files(inputs, None, out, client=client, iq_correct=True, html=True, annotate=True, resume=True)
    assert [c.resumed for c in kept.captures] == [True, True] and kept.cluster["kind"] == "none"
    gone = out / "hf_segment" / "hf_segment.annotated.sigmf-meta"
    digest = hashlib.sha256(gone.read_bytes()).hexdigest()
    gone.unlink()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        again = batch_files(inputs, None, out, client=client, iq_correct=True, html=True, annotate=True,
                            resume=True, force=True)
    assert [c.resumed for c in again.captures] == [True, False]
    assert hashlib.sha256(gone.read_bytes()).hexdigest() == digest  # made again, the same bytes
    after = (out / "batch.jsonl").read_text().splitlines()
    assert json.loads(after[0]) == {**json.loads(before[0]), "resumed": True}
    def untimed(line: str) -> list[dict]:  # report.json holds timings: every other file is the same again
        return [o for o in json.loads(line)["outputs"] if not o["path"].endswith("report.json")]
    assert untimed(after[1]) == untimed(before[1]) and len(untimed(after[1])) > 4


def test_a_split_capture_gets_the_same_annotations(batch, inputs, client, tmp_path):
    out, _ = batch
    capture, plan = inputs[1]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        result = batch_files([capture], plan, tmp_path / "split", client=client, annotate=True, split_seconds=0.7)
    assert not result.failed and result.captures[0].split is not None
    name = "hf_segment/hf_segment.annotated.sigmf-meta"
    split_doc = json.loads((tmp_path / "split" / name).read_text())
    whole_doc = json.loads((out / name).read_text())
    validated(tmp_path / "split" / name)
    # the whole run was IQ-corrected: its levels may differ, its segments' sample ranges and labels not
    keys = ("core:sample_start", "core:sample_count", "core:label")
    assert [[a.get(k) for k in keys] for a in split_doc["annotations"]] == [
        [a.get(k) for k in keys] for a in whole_doc["annotations"]]


@pytest.mark.parametrize("flag, words", [("--html", "--split-seconds: cannot be combined with --html yet"),
                                         ("--iq-correct", "--split-seconds: cannot be combined with --iq-correct yet")])
def test_split_refuses_html_and_iq_correct_in_one_line(flag, words, inputs, tmp_path, capsys):
    capture, plan = inputs[1]
    status = main(["batch", str(capture), "-p", str(plan), "-o", str(tmp_path / "b"), "--split-seconds", "1", "-q",
                   flag])
    err = capsys.readouterr().err
    assert status == 2 and words in err and len(err.strip().splitlines()) == 1
    assert not (tmp_path / "b").exists()


def test_annotate_fails_a_capture_it_cannot_describe_and_leaves_no_folder(inputs, client, tmp_path):
    wav = tmp_path / "tone.wav"
    sf.write(wav, np.zeros((4800, 2), np.float32), 48000)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        result = batch_files([wav], inputs[1][1], tmp_path / "b", client=client, annotate=True)
    assert [c.status for c in result.captures] == ["failed"]
    assert "annotate" in (result.captures[0].error or "") and "wav" in (result.captures[0].error or "")
    assert sorted(os.listdir(tmp_path / "b")) == ["activity.csv", "batch.jsonl"]
