"""Fuzzing what users feed in ([2/6] item 12): mutated SigMF metadata, WAV headers and raw-file options.

Whatever the mutation, the command line either succeeds with output that validates against its schema, or
refuses with exit status 2 and one ``iqsift: error:`` line; never a traceback, never another status. The
examples are drawn by hypothesis under the fixed ``ci`` profile (tests/conftest.py: derandomized, so CI runs the
same examples every time), at least 1000 of them for the SigMF metadata.
"""

from __future__ import annotations

import contextlib
import copy
import io
import json
import struct
import tempfile
from pathlib import Path
from typing import Any

import jsonschema
import numpy as np
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from iqsift.cli import main
from iqsift.schemas import load_schema

RATE_HZ = 48_000.0
SAMPLES = 256
IQ = (np.exp(2j * np.pi * 0.1 * np.arange(SAMPLES)) * 0.5).astype(np.complex64)
DATA = IQ.view(np.float32).tobytes()  # cf32_le, 2048 bytes
SHA512 = __import__("hashlib").sha512(DATA).hexdigest()

# A valid recording (SigMF 1.2 core namespace), the starting point of every mutation.
VALID_META: dict[str, Any] = {
    "global": {
        "core:datatype": "cf32_le",
        "core:sample_rate": RATE_HZ,
        "core:version": "1.2.6",
        "core:sha512": SHA512,
        "core:num_channels": 1,
    },
    "captures": [{"core:sample_start": 0, "core:frequency": 127.5e6}],
    "annotations": [{"core:sample_start": 10, "core:sample_count": 100, "core:label": "burst"}],
}

INFO_SCHEMA = load_schema("info-v1")
FUZZ = settings(max_examples=1000, suppress_health_check=[HealthCheck.too_slow], deadline=None)

json_values = st.recursive(
    st.none() | st.booleans() | st.integers(-2**70, 2**70) | st.text(max_size=12)
    | st.floats(allow_nan=True, allow_infinity=True) | st.sampled_from([0, -1, 1e308, 2**63, "cf32_le", "ri16_be",
                                                                          "cu8", "c", "", "1.2.6", "9.9.9"]),
    lambda inner: st.lists(inner, max_size=3) | st.dictionaries(st.text(max_size=8), inner, max_size=3),
    max_leaves=6,
)
KEYS = ["core:datatype", "core:sample_rate", "core:version", "core:sha512", "core:num_channels", "core:offset",
        "core:dataset", "core:frequency", "core:sample_start", "core:sample_count", "core:global_index",
        "core:header_bytes", "core:datetime", "core:extensions", "core:trailing_bytes", "core:metadata_only"]


@st.composite
def mutated_metadata(draw: st.DrawFn) -> str:
    """The valid metadata with a few edits: values replaced, keys dropped or added, sections retyped, text cut."""
    meta = copy.deepcopy(VALID_META)
    for _ in range(draw(st.integers(1, 3))):
        section = draw(st.sampled_from(["global", "captures", "annotations", "top"]))
        action = draw(st.sampled_from(["set", "drop", "retype"]))
        if section == "top":
            name = draw(st.sampled_from(["global", "captures", "annotations"]))
            if action == "drop":
                meta.pop(name, None)
            else:
                meta[name] = draw(json_values)
            continue
        target = meta.get(section)
        if isinstance(target, list):
            if not target or action == "retype":
                target.append(draw(json_values) if action == "retype" else {})
            target = target[-1] if target else None
        if not isinstance(target, dict):
            continue
        key = draw(st.sampled_from(KEYS))
        if action == "drop":
            target.pop(key, None)
        else:
            target[key] = draw(json_values)
    text = json.dumps(meta, allow_nan=True)
    if draw(st.integers(0, 9)) == 0:  # one in ten: a truncated or garbled file
        text = text[: draw(st.integers(0, len(text)))] + draw(st.text(max_size=4))
    return text


def run(*args: str) -> tuple[int, str, str]:
    """The command line in this process, its output captured."""
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        status = main([str(a) for a in args])
    return status, out.getvalue(), err.getvalue()


def check_outcome(status: int, out: str, err: str) -> None:
    """Success with schema-valid JSON, or exit 2 with exactly one error line; never a traceback."""
    assert "Traceback" not in err and "Traceback" not in out, err
    assert status in (0, 2), (status, err)
    errors = [line for line in err.splitlines() if line.startswith("iqsift: error:")]
    if status == 0:
        assert errors == [], err
        jsonschema.validate(json.loads(out), INFO_SCHEMA)  # JSON Schema draft 2020-12 (json-schema.org)
    else:
        assert len(errors) == 1 and err.splitlines()[-1] == errors[0], err
        assert all(line.startswith("iqsift: ") for line in err.splitlines()), err


@FUZZ
@given(text=mutated_metadata(), data_bytes=st.sampled_from([len(DATA), 1000, len(DATA) + 3, 0]))
def test_mutated_sigmf_metadata_never_crashes(text: str, data_bytes: int) -> None:
    data = (DATA + b"\0" * 3)[:data_bytes]
    with tempfile.TemporaryDirectory() as folder:
        meta = Path(folder) / "rec.sigmf-meta"
        meta.write_text(text)
        meta.with_suffix(".sigmf-data").write_bytes(data)
        check_outcome(*run("info", meta, "--json"))


def wav_bytes() -> bytes:
    """A 16-bit stereo (I/Q) WAV written by hand from the RIFF/WAVE layout (Microsoft/IBM 1991 specification)."""
    pcm = (np.stack([IQ.real, IQ.imag], 1) * 32767).astype("<i2").tobytes()
    fmt = struct.pack("<HHIIHH", 1, 2, int(RATE_HZ), int(RATE_HZ) * 4, 4, 16)
    return (b"RIFF" + struct.pack("<I", 36 + len(pcm)) + b"WAVE" + b"fmt " + struct.pack("<I", 16) + fmt
            + b"data" + struct.pack("<I", len(pcm)) + pcm)


WAV = wav_bytes()


@settings(max_examples=300, suppress_health_check=[HealthCheck.too_slow], deadline=None)
@given(edits=st.lists(st.tuples(st.integers(0, 59), st.integers(0, 255)), min_size=1, max_size=4),
       cut=st.one_of(st.none(), st.integers(0, len(WAV))))
def test_mutated_wav_header_never_crashes(edits: list[tuple[int, int]], cut: int | None) -> None:
    raw = bytearray(WAV)
    for offset, value in edits:  # the RIFF, fmt and data chunk headers, and the first samples
        raw[offset] = value
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "rec.wav"
        path.write_bytes(bytes(raw[:cut]))
        check_outcome(*run("info", path, "--json"))


@settings(max_examples=200, suppress_health_check=[HealthCheck.too_slow], deadline=None)
@given(fmt=st.one_of(st.sampled_from(["cf32_le", "ci16_le", "cu8", "ri8", "cf64_be", "cf32", "cx", ""]),
                     st.text(max_size=8)),
       rate=st.one_of(st.sampled_from(["48k", "0", "-1", "nan", "inf", "1e400", "2.4M", "1 kHz", ""]), st.text(max_size=6)),
       size=st.integers(0, 70))
def test_raw_capture_options_never_crash(fmt: str, rate: str, size: int) -> None:
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "rec.bin"
        path.write_bytes(DATA[:size])
        check_outcome(*run("info", path, "--format", fmt, "--rate", rate, "--json"))
