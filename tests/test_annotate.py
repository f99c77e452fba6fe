"""--annotate: SigMF metadata of the same recording with what survey, extract and demod found.

Outside reference: the `sigmf` package (SigMF specification v1.2 as its validator implements it) reads
and validates every document written; its warnings (e.g. an undeclared extension namespace) are errors.
"""

from __future__ import annotations

import json
import re
import shutil
import warnings
from pathlib import Path

import numpy as np
import pytest
import sigmf

from iqsift import make_channel
from iqsift.captures import open_capture
from iqsift.captures.sigmf import EXTENSION
from iqsift.errors import ParameterError
from iqsift.jobs import demod_file, extract_file, survey_file
from iqsift.reference import reference_factor

ROOT = Path(__file__).resolve().parent.parent
SAMPLES = ROOT / "sample_captures"
DOC = ROOT / "docs" / "iqsift.sigmf-ext.md"


@pytest.fixture(scope="module")
def vhf(tmp_path_factory) -> Path:
    folder = tmp_path_factory.mktemp("vhf")
    for suffix in (".sigmf-meta", ".sigmf-data"):
        shutil.copy(SAMPLES / f"vhf_airband{suffix}", folder / f"vhf_airband{suffix}")
    return folder / "vhf_airband.sigmf-meta"


def _validated(path: Path) -> sigmf.SigMFFile:
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        handle = sigmf.fromfile(str(path))
        handle.validate()
    return handle


def _ours(handle: sigmf.SigMFFile) -> list[dict]:
    return [a for a in handle.get_annotations() if a.get("core:generator", "").startswith("iqsift ")
            and a.get("core:generator") != "iqsift synth"]


def test_survey_annotations_validate_and_describe_the_same_recording(vhf):
    out = vhf.with_name("found.sigmf-meta")
    report = survey_file(vhf, raster="8.33k", annotate=out)
    handle = _validated(out)
    own = json.loads(vhf.read_text())
    # the recording's own metadata kept: global keys, captures, its annotations
    assert handle.get_global_field("core:sha512") == own["global"]["core:sha512"]
    assert handle.get_global_field("core:dataset") == "vhf_airband.sigmf-data"
    assert {"name": "iqsift", "version": EXTENSION["version"], "optional": True} in \
        handle.get_global_field("core:extensions")
    kept = [a for a in handle.get_annotations() if a.get("core:generator") == "iqsift synth"]
    assert len(kept) == len(own["annotations"])
    ours = _ours(handle)
    assert len(ours) == len(report.survey.emissions)
    for a, e in zip(sorted(ours, key=lambda a: a["iqsift:emission"]), report.survey.emissions):
        assert a["core:freq_lower_edge"] == pytest.approx(e.occupied_lo_hz)
        assert a["core:freq_upper_edge"] == pytest.approx(e.occupied_hi_hz)
        assert a["core:freq_lower_edge"] <= e.frequency_hz <= a["core:freq_upper_edge"]
        assert a["core:label"] == e.channel_name and e.designator in a["core:comment"]
        assert a["core:sample_count"] == 1920000
    # the same samples, read by iqsift through core:dataset (checksum verified on the way)
    with open_capture(out) as cap, open_capture(vhf) as orig:
        np.testing.assert_array_equal(cap.read(), orig.read())
        assert len(cap.annotations) == len(own["annotations"]) + len(ours)
    assert report.to_dict()["annotations"] == str(out)


def test_extract_and_demod_annotate_activity_segments(vhf, tmp_path):
    plan = tmp_path / "plan.toml"
    survey_file(vhf, raster="8.33k", plan_out=plan)
    out = vhf.with_name("extract.sigmf-meta")
    result = extract_file(vhf, plan, tmp_path / "x", annotate=out, start=1.0)
    ours = _ours(_validated(out))
    segments = [(c.to_dict()["channel"], s) for c in result.channels for s in c.to_dict()["activity"]]
    assert len(ours) == len(segments) >= 5
    by_start = sorted(ours, key=lambda a: (a["iqsift:channel_name"], a["core:sample_start"]))
    for a, (ch, seg) in zip(by_start, sorted(segments, key=lambda cs: (cs[0]["name"], cs[1]["start_s"]))):
        assert a["core:label"] == ch["name"]
        assert a["core:sample_start"] == round(seg["start_s"] * 240e3) >= 240000  # capture samples, from 1 s
        assert a["core:sample_count"] == round(seg["end_s"] * 240e3) - a["core:sample_start"]
        assert a["core:freq_lower_edge"] == pytest.approx(ch["frequency_hz"] - 3000)
        assert a["core:freq_upper_edge"] == pytest.approx(ch["frequency_hz"] + 3000)
    assert result.to_dict()["outputs"]["annotations"] == str(out)

    out = vhf.with_name("demod.sigmf-meta")
    demod_file(vhf, make_channel(freq=124.025e6, emission="6K00A3E", name="north"), tmp_path / "n.wav",
               annotate=out)
    ours = _ours(_validated(out))
    # truth (sample_captures/vhf_airband.toml): bursts 0.15-2.921 s and 5.15-7.37 s
    assert [a["core:label"] for a in ours] == ["north", "north"]
    starts = [a["core:sample_start"] / 240e3 for a in ours]
    assert starts == pytest.approx([0.15, 5.15], abs=0.02)


def test_raw_capture_gets_a_new_global_with_core_dataset(tmp_path):
    rng = np.random.default_rng(1)
    n = 1 << 15
    x = (0.01 * (rng.standard_normal(n) + 1j * rng.standard_normal(n))).astype(np.complex64)
    x += 0.1 * np.exp(2j * np.pi * 10e3 * np.arange(n) / 96e3).astype(np.complex64)
    raw = tmp_path / "cap.cf32"
    x.tofile(raw)
    out = tmp_path / "cap.sigmf-meta"
    survey_file(raw, format="cf32_le", rate=96e3, center=10e6, annotate=out)
    handle = _validated(out)
    assert handle.get_global_field("core:dataset") == "cap.cf32"
    assert handle.get_global_field("core:sample_rate") == 96e3
    assert handle.get_captures()[0]["core:frequency"] == 10e6
    np.testing.assert_array_equal(handle.read_samples(), x)
    assert len(_ours(handle)) == 1


def test_edges_stay_on_the_recordings_scale_under_a_correction(vhf):
    out = vhf.with_name("ppm.sigmf-meta")
    report = survey_file(vhf, annotate=out, ppm=8.0)
    doc = json.loads(out.read_text())
    assert doc["global"]["iqsift:reference_ppm"] == 8.0
    assert doc["global"]["core:sample_rate"] == 240e3  # the recording's own
    ours = [a for a in doc["annotations"] if "iqsift:emission" in a]
    k = reference_factor(8.0)
    for a, e in zip(ours, report.survey.emissions):
        assert a["iqsift:frequency_hz"] == e.frequency_hz  # true
        assert a["core:freq_lower_edge"] == pytest.approx(e.occupied_lo_hz / k)  # where the signal shows


@pytest.mark.parametrize("name, message", [
    ("elsewhere/x.sigmf-meta", "folder of the data file"),
    ("x.json", "must end in .sigmf-meta"),
])
def test_bad_annotation_paths_are_refused_before_any_work(vhf, tmp_path, name, message):
    target = tmp_path / name if name.startswith("elsewhere") else vhf.with_name(name)
    target.parent.mkdir(exist_ok=True)
    with pytest.raises(ParameterError, match=message):
        survey_file(vhf, annotate=target)
    assert not target.exists()


def test_the_input_metadata_is_never_overwritten(vhf):
    before = vhf.read_bytes()
    with pytest.raises(Exception):
        survey_file(vhf, annotate=vhf, force=True)
    assert vhf.read_bytes() == before


def test_extension_is_documented_with_its_version_and_keys(vhf):
    # SigMF 1.2 asks that an extension be documented, with a version; every iqsift: key iqsift writes is listed
    text = DOC.read_text(encoding="utf-8")
    assert re.search(rf"\bversion\b.*{re.escape(EXTENSION['version'])}", text, re.IGNORECASE)
    keys: set[str] = set()
    for name in ("found", "extract", "demod", "ppm"):
        path = vhf.with_name(f"{name}.sigmf-meta")
        if path.exists():
            doc = json.loads(path.read_text())
            keys |= {k for k in doc["global"] if k.startswith("iqsift:")}
            keys |= {k for a in doc["annotations"] for k in a if k.startswith("iqsift:")}
    assert keys, "run after the annotation tests (module order)"
    missing = sorted(k for k in keys if f"`{k}`" not in text)
    assert missing == []
