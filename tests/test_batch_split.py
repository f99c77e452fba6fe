"""`iqsift batch --split-seconds`: one capture cut into time pieces and joined sample for sample.

The reference throughout is a whole pass of iqsift's own streaming code (the filter bank fed the capture's
reading blocks, and the single-process `extract_file` job), whose exactness against scipy is checked in
the channelizer and receiver tests; here the pieces must give the very same samples and bytes
(np.array_equal, byte-equal WAV files), not merely close ones.
"""

from __future__ import annotations

import dataclasses
import json
import os
import shutil
import warnings
from pathlib import Path

import jsonschema
import numpy as np
import pytest

from iqsift.captures import open_capture
from iqsift.cli import main
from iqsift.errors import ParameterError
from iqsift.extractor import Extractor
from iqsift.jobs import batch_files, extract_file
from iqsift.jobs import split as split_job
from iqsift.plan import load_plan
from iqsift.schemas import load_schema

from .conftest import TIMINGS

SAMPLES = Path(__file__).resolve().parents[1] / "sample_captures"
VHF = SAMPLES / "vhf_airband.sigmf-meta"
HF = SAMPLES / "hf_segment.sigmf-meta"
VHF_PLAN = "".join(f'[[channel]]\nname = "{n}"\nchannel_name = "{c}"\nemission = "6K00A3E"\n\n'
                   for n, c in (("north-ground", "124.030"), ("weak", "124.035"), ("apron", "124.090")))
# three back-end units: an SSB channel, an envelope AM channel and a coherent one with a squelch
HF_PLAN = ('[[channel]]\nname = "lsb"\nfreq = "7.127978M"\nemission = "2K70J3E"\nmode = "lsb"\n\n'
           '[[channel]]\nname = "am"\nfreq = "7.185M"\nemission = "8K00A3E"\n\n'
           '[[channel]]\nname = "sync"\nfreq = "7.185M"\nemission = "8K00A3E"\nmode = "coherent"\nsquelch_db = 10\n')


@pytest.fixture(scope="module")
def plans(tmp_path_factory):
    folder = tmp_path_factory.mktemp("plans")
    (folder / "vhf.toml").write_text(VHF_PLAN)
    (folder / "hf.toml").write_text(HF_PLAN)
    return {"vhf": folder / "vhf.toml", "hf": folder / "hf.toml"}


@pytest.fixture(scope="module")
def reference(plans, tmp_path_factory):
    """Both sample captures extracted whole in this process, as `iqsift extract` does."""
    out = tmp_path_factory.mktemp("reference")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # clipped samples between transmissions: expected of these captures
        for name, capture in (("vhf", VHF), ("hf", HF)):
            extract_file(capture, plans[name], out / capture.name.split(".")[0])
    return out


def whole_pass(capture: Path, plan: Path) -> tuple[list[np.ndarray], list[np.ndarray], list[np.ndarray]]:
    """Every channel's bank outputs over the whole capture, then for the end padding and the flush."""
    with open_capture(capture) as cap:
        extractor = Extractor.from_plan(cap, load_plan(plan), selection=cap.select(None, None))
        parts: list[list[np.ndarray]] = [[] for _ in extractor.receivers]
        for block in cap.blocks():
            for part, out in zip(parts, extractor.bank.process(block)):
                part.append(out)
        tails = extractor.bank.process(np.zeros(extractor.flush_padding, np.complex64))
        return [np.concatenate(p) for p in parts], tails, extractor.bank.flush()


def comparable(report: dict) -> dict:
    """A report without its timings and the paths of its outputs."""
    out = {k: v for k, v in report.items() if k not in TIMINGS | {"outputs"}}
    out["channels"] = [{k: v for k, v in c.items() if k != "outputs"} for c in report["channels"]]
    return out


def assert_same_folder(folder: Path, reference: Path) -> None:
    assert sorted(p.name for p in folder.iterdir()) == sorted(p.name for p in reference.iterdir())
    for wav in reference.glob("*.wav"):
        assert (folder / wav.name).read_bytes() == wav.read_bytes(), wav.name  # byte for byte
    got = json.loads((folder / "report.json").read_text())
    want = json.loads((reference / "report.json").read_text())
    assert comparable(got) == comparable(want)
    for got_channel, want_channel in zip(got["channels"], want["channels"]):
        assert got_channel["outputs"]["audio_clipped_samples"] == want_channel["outputs"]["audio_clipped_samples"]


@pytest.mark.parametrize("capture, plan_name", [(VHF, "vhf"), (HF, "hf")])
@pytest.mark.parametrize("seconds", [0.37, 1.0, 2.9, 1e-6])
def test_pieces_of_the_bank_join_to_exactly_a_whole_pass(capture, plan_name, seconds, plans, tmp_path):
    job = split_job.plan_split(str(capture), str(plans[plan_name]), {}, seconds, str(tmp_path))
    with open_capture(capture) as cap:
        rate = cap.sample_rate_hz
    # lengths aligned to nothing in particular are rounded to the nearest whole number of hops (at least one)
    assert job.piece_samples % job.hop == 0
    assert job.piece_samples == max(job.hop, round(seconds * rate / job.hop) * job.hop)
    assert abs(job.piece_samples - seconds * rate) <= job.hop / 2 or job.piece_samples == job.hop
    pieces = [split_job.front_piece(job, k) for k in range(job.pieces)]
    outs, tails, flushed = whole_pass(capture, plans[plan_name])
    for i, whole in enumerate(outs):
        joined = np.concatenate([p.outs[i] for p in pieces])
        assert joined.dtype == np.complex64 and joined.size == whole.size > 0
        assert np.array_equal(joined, whole), f"channel {i}: first difference at {np.argmax(joined != whole)}"
        assert np.array_equal(pieces[-1].tails[i], tails[i]) and np.array_equal(pieces[-1].flushed[i], flushed[i])
    assert all(p.tails is None for p in pieces[:-1])


def test_the_bank_refuses_a_start_off_its_hop_grid(plans):
    with open_capture(VHF) as cap:
        bank = Extractor.from_plan(cap, load_plan(plans["vhf"])).bank
    with pytest.raises(ParameterError, match="hop grid"):
        bank.start_at(bank.hop + 1, np.zeros(bank.history, np.complex64))
    with pytest.raises(ParameterError, match="history"):
        bank.start_at(bank.hop, np.zeros(bank.history - 1, np.complex64))


@pytest.mark.parametrize("seconds", [0.5, 1.3])
def test_unit_chains_over_the_pieces_write_what_extract_writes(seconds, plans, reference, tmp_path):
    job = split_job.plan_split(str(HF), str(plans["hf"]), {}, seconds, str(tmp_path))
    assert len(job.units) == 3 and job.pieces > 2
    states = [split_job.start_unit(job, unit) for unit in job.units]
    for k in range(job.pieces):
        piece = split_job.front_piece(job, k)
        states = [split_job.back_step(job, state, piece) for state in states]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        split_job.write_outputs(job, states, tmp_path / "out", 0.0)
    assert_same_folder(tmp_path / "out", reference / "hf_segment")


def test_a_retried_step_starts_from_its_input_state(plans, tmp_path):
    job = split_job.plan_split(str(VHF), str(plans["vhf"]), {}, 1.0, str(tmp_path))
    job = dataclasses.replace(job, block_size=100_000)  # this capture is shorter than one reading block
    state = split_job.start_unit(job, job.units[0])
    piece = split_job.front_piece(job, 0)
    first = split_job.back_step(job, state, piece)
    audio = (tmp_path / "channel-0.f32").read_bytes()
    second = split_job.back_step(job, state, piece)  # as Dask re-runs a failed task: same input state
    assert (tmp_path / "channel-0.f32").read_bytes() == audio  # rewritten, not appended twice
    assert first.written == second.written and first.written[0] > 0 and state.next_block == 0


def test_split_batch_on_two_workers_equals_whole_extract(client, plans, reference, tmp_path):
    out = tmp_path / "batch"
    ticks: list[tuple[int, int]] = []
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        result = batch_files([(VHF, plans["vhf"]), (HF, plans["hf"])], None, out, client=client,
                             split_seconds=0.7, progress=lambda done, total: ticks.append((done, total)))
    jsonschema.Draft202012Validator(load_schema("batch-v1")).validate(result.to_dict())
    assert not result.failed
    lines = [json.loads(t) for t in (out / "batch.jsonl").read_text().splitlines()]
    pieces = 0
    for line, stem in zip(lines, ("vhf_airband", "hf_segment")):
        assert line["status"] == "ok" and line["split"]["seconds"] == 0.7 and line["split"]["pieces"] > 5
        pieces += line["split"]["pieces"]
        assert_same_folder(out / stem, reference / stem)
    assert [line["split"]["units"] for line in lines] == [1, 3]
    assert ticks == [(1, pieces)] * pieces  # the progress counts pieces
    assert sorted(p.name for p in out.iterdir()) == ["activity.csv", "batch.jsonl", "hf_segment", "vhf_airband"]


@pytest.mark.parametrize("extra, words", [(["--spectra"], "--split-seconds: cannot be combined with spectra"),
                                          (["--baseband"], "cannot be combined with baseband"),
                                          ([], "--split-seconds: got 0.0")])
def test_split_refuses_what_it_cannot_do_before_any_work(extra, words, plans, tmp_path, capsys):
    seconds = "0" if not extra else "1"
    status = main(["batch", str(VHF), "-p", str(plans["vhf"]), "-o", str(tmp_path / "b"), "--split-seconds", seconds,
                   "-q", *extra])
    assert status == 2
    assert words in capsys.readouterr().err and not (tmp_path / "b").exists()


def test_split_batch_leaves_nothing_when_the_capture_fails(client, plans, tmp_path):
    broken = tmp_path / "cut.sigmf-meta"
    meta = json.loads(VHF.read_text())
    shutil.copyfile(SAMPLES / "vhf_airband.sigmf-data", broken.with_suffix(".sigmf-data"))
    meta["global"]["core:sha512"] = "0" * 128  # a checksum the data does not match: found by a task
    broken.write_text(json.dumps(meta))
    out = tmp_path / "batch"
    result = batch_files([broken], plans["vhf"], out, client=client, split_seconds=0.5)
    assert [c.status for c in result.captures] == ["failed"] and "cut.sigmf" in (result.captures[0].error or "")
    assert "sha512" in (result.captures[0].error or "").lower()
    assert sorted(os.listdir(out)) == ["activity.csv", "batch.jsonl"]  # no folder, no pieces left
    shutil.rmtree(out)


def test_a_split_capture_gets_the_receiver_correction_a_whole_extract_gets(plans, tmp_path):
    # the plan's [defaults] ppm (iqsift.reference) applies to the pieces as to a whole extract
    plan = tmp_path / "ppm.toml"
    plan.write_text("[defaults]\nppm = 3.5\n\n" + HF_PLAN)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        extract_file(HF, plan, tmp_path / "whole")
        job = split_job.plan_split(str(HF), str(plan), {}, 1.3, str(tmp_path))
        states = [split_job.start_unit(job, unit) for unit in job.units]
        for k in range(job.pieces):
            piece = split_job.front_piece(job, k)
            states = [split_job.back_step(job, state, piece) for state in states]
        split_job.write_outputs(job, states, tmp_path / "split", 0.0)
    assert_same_folder(tmp_path / "split", tmp_path / "whole")
    report = json.loads((tmp_path / "split" / "report.json").read_text())
    assert report["capture"]["frequency_reference"]["correction_ppm"] == 3.5


def test_a_split_refuses_independent_sideband_channels_before_any_work(tmp_path):
    # their per-sideband measurements are not carried across pieces yet: refused, not reported wrong
    plan = tmp_path / "isb.toml"
    plan.write_text('[[channel]]\nname = "both"\nfreq = "7.162M"\nemission = "6K00B8E"\n')
    with pytest.raises(ParameterError, match="independent-sideband channels yet \\(both\\)"):
        split_job.plan_split(str(HF), str(plan), {}, 0.9, str(tmp_path / "work"))
    assert not (tmp_path / "work").exists()
