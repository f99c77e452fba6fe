"""`iqsift batch` on real Dask clusters (127.0.0.1 only, started and stopped here): a local cluster of two
worker processes, a worker killed mid-task, and a scheduler and worker started as separate processes with
the `dask scheduler` / `dask worker` commands. Every capture's outputs must equal single-process
`extract_file` (audio within 1 LSB of 16 bits, reports equal apart from timings and paths).

The reference is iqsift's own single-process extract job; the WAV files are read back with soundfile.
"""

from __future__ import annotations

import contextlib
import csv
import hashlib
import io
import json
import os
import shutil
import signal
import subprocess
import sys
import threading
import time
import warnings
from pathlib import Path

import jsonschema
import numpy as np
import pytest
import soundfile as sf

from iqsift.cli import main
from iqsift.jobs import batch_files, extract_file
from iqsift.jobs.batch import read_manifest
from iqsift.schemas import load_schema

from .conftest import comparable

SAMPLES = Path(__file__).resolve().parents[1] / "sample_captures"
VHF_PLAN = "".join(f'[[channel]]\nname = "{n}"\nchannel_name = "{c}"\nemission = "6K00A3E"\n\n'
                   for n, c in (("north-ground", "124.030"), ("weak", "124.035"), ("apron", "124.090")))
HF_PLAN = ('[[channel]]\nname = "lsb"\nfreq = "7.127978M"\nemission = "2K70J3E"\nmode = "lsb"\n\n'
           '[[channel]]\nname = "am"\nfreq = "7.185M"\nemission = "8K00A3E"\n')


def copy_capture(source: str, target: Path, *, repeat: int = 1, datetime: str | None = None) -> Path:
    """A copy of a sample capture under another name, its data repeated, with a core:datetime if given."""
    meta = json.loads((SAMPLES / f"{source}.sigmf-meta").read_text())
    meta["global"].pop("core:sha512", None)
    if datetime is not None:
        meta["captures"][0]["core:datetime"] = datetime
    target.with_suffix(".sigmf-data").write_bytes((SAMPLES / f"{source}.sigmf-data").read_bytes() * repeat)
    target.with_suffix(".sigmf-meta").write_text(json.dumps(meta))
    return target.with_suffix(".sigmf-meta")


@pytest.fixture(scope="module")
def captures(tmp_path_factory):
    """Three captures (one 24 s long, two with a start time) and a manifest giving the HF one its own plan."""
    folder = tmp_path_factory.mktemp("captures")
    (folder / "vhf.toml").write_text(VHF_PLAN)
    (folder / "hf.toml").write_text(HF_PLAN)
    copy_capture("vhf_airband", folder / "north", repeat=3, datetime="2026-03-01T12:00:00Z")
    copy_capture("vhf_airband", folder / "south", datetime="2026-03-01T09:30:00.25Z")
    copy_capture("hf_segment", folder / "shortwave")
    (folder / "list.txt").write_text("north.sigmf-meta\nsouth.sigmf-meta\nshortwave.sigmf-meta hf.toml\n")
    return folder


@pytest.fixture(scope="module")
def reference(captures, tmp_path_factory):
    """Each capture extracted in this process, as `iqsift extract` does."""
    out = tmp_path_factory.mktemp("reference")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # clipped samples between transmissions: expected of these captures
        for capture, plan in read_manifest(captures / "list.txt"):
            extract_file(capture, plan or captures / "vhf.toml", out / Path(capture).name.split(".")[0])
    return out


def assert_same_as_reference(folder: Path, reference: Path) -> None:
    assert sorted(p.name for p in folder.iterdir()) == sorted(p.name for p in reference.iterdir())
    for wav in sorted(reference.glob("*.wav")):
        want, want_rate = sf.read(wav, dtype="int16")
        got, got_rate = sf.read(folder / wav.name, dtype="int16")
        assert got_rate == want_rate and got.shape == want.shape and want.size > 0
        assert np.abs(got.astype(np.int32) - want).max() <= 1, wav.name
    got_report = json.loads((folder / "report.json").read_text())
    want_report = json.loads((reference / "report.json").read_text())
    assert comparable(got_report) == comparable(want_report)
    assert got_report["outputs"]["folder"] == str(folder)  # the report names the final folder, not staging


def assert_complete_batch(out: Path, reference: Path, stems: list[str]) -> list[dict]:
    """Every capture ok and identical to the reference, its outputs' sha256 right, no staging left."""
    lines = [json.loads(t) for t in (out / "batch.jsonl").read_text().splitlines()]
    line_schema = load_schema("batch-v1")["properties"]["captures"]["items"]
    assert [line["stem"] for line in lines] == stems
    for line in lines:
        jsonschema.Draft202012Validator(line_schema).validate(line)
        assert line["status"] == "ok", line
        assert_same_as_reference(out / line["stem"], reference / line["stem"])
        files = sorted(str(p.relative_to(out)) for p in (out / line["stem"]).rglob("*") if p.is_file())
        assert [o["path"] for o in line["outputs"]] == files
        for o in line["outputs"]:
            assert o["sha256"] == hashlib.sha256((out / o["path"]).read_bytes()).hexdigest()
        assert set(line["versions"]) == {"iqsift", "numpy", "scipy", "python"}
    assert sorted(p.name for p in out.iterdir()) == sorted([*stems, "batch.jsonl", "activity.csv"])
    return lines


def test_two_worker_processes_give_what_single_process_extract_gives(client, captures, reference, tmp_path):
    out = tmp_path / "batch"
    result = batch_files(read_manifest(captures / "list.txt"), captures / "vhf.toml", out, client=client)
    jsonschema.Draft202012Validator(load_schema("batch-v1")).validate(result.to_dict())
    assert result.cluster["workers"] == 2 and not result.failed
    lines = assert_complete_batch(out, reference, ["north", "south", "shortwave"])
    assert len({line["worker"] for line in lines}) == 2  # both workers took a share

    rows = list(csv.DictReader(io.StringIO((out / "activity.csv").read_text())))
    reports = {s: json.loads((reference / s / "report.json").read_text()) for s in ("north", "south", "shortwave")}
    assert len(rows) == sum(len(c["activity"]) for r in reports.values() for c in r["channels"]) > 0
    dated = [r["start_utc"] for r in rows if r["start_utc"]]
    assert dated == sorted(dated) and [r["capture"] for r in rows] == sorted(
        (r["capture"] for r in rows), key=["south", "north", "shortwave"].index)  # 09:30, 12:00, undated
    north = reports["north"]["channels"][0]["activity"][0]
    row = next(r for r in rows if r["capture"] == "north" and r["channel"] == "north-ground")
    assert float(row["start_s"]) == pytest.approx(north["start_s"], abs=1e-6)
    seconds = float(row["start_utc"][17:-1])  # 2026-03-01T12:00:SS.ffffffZ
    assert row["start_utc"].startswith("2026-03-01T12:00:") and seconds == pytest.approx(north["start_s"], abs=1e-6)

    # resume: nothing to do while every output is intact; a capture whose folder went is run again
    again = batch_files(read_manifest(captures / "list.txt"), captures / "vhf.toml", out, client=client, resume=True)
    assert [c.resumed for c in again.captures] == [True, True, True] and again.cluster["kind"] == "none"
    assert len(again.activity) == len(rows)
    shutil.rmtree(out / "south")
    again = batch_files(read_manifest(captures / "list.txt"), captures / "vhf.toml", out, client=client, resume=True)
    assert [c.resumed for c in again.captures] == [True, False, True]
    assert_complete_batch(out, reference, ["north", "south", "shortwave"])


def test_a_worker_killed_mid_task_still_gives_complete_identical_outputs(client, captures, reference, tmp_path):
    out = tmp_path / "batch"
    finished: dict = {}
    runner = threading.Thread(target=lambda: finished.setdefault("result", batch_files(
        read_manifest(captures / "list.txt"), captures / "vhf.toml", out, client=client)))
    runner.start()
    killed = None
    deadline = time.monotonic() + 60
    while killed is None and time.monotonic() < deadline and runner.is_alive():
        if any(out.glob(".north.batch-partial-*")):  # the long capture's task is writing
            busy = [w for w, keys in client.processing().items() if any("-north-" in str(k) for k in keys)]
            if busy:
                killed = busy[0]
                os.kill(client.run(os.getpid, workers=[killed])[killed], signal.SIGKILL)
        time.sleep(0.01)
    runner.join(timeout=120)
    assert killed is not None, "the long capture's task was never seen running"
    result = finished["result"]
    assert not result.failed
    assert result.captures[0].worker != killed  # the killed attempt did not finish; another one did
    assert_complete_batch(out, reference, ["north", "south", "shortwave"])
    client.wait_for_workers(2, timeout=60)  # the nanny brought the worker back


def test_an_unreadable_capture_fails_alone_with_exit_status_1(captures, reference, tmp_path, capsys):
    (tmp_path / "broken.sigmf-meta").write_text("{ not json")
    out = tmp_path / "batch"
    with pytest.raises(SystemExit) as stopped:
        main(["batch", str(captures / "south.sigmf-meta"), str(tmp_path / "broken.sigmf-meta"),
              "--plan", str(captures / "vhf.toml"), "-o", str(out), "--workers", "2", "--json", "-q"])
    assert stopped.value.code == 1
    printed = capsys.readouterr()
    document = json.loads(printed.out)
    jsonschema.Draft202012Validator(load_schema("batch-v1")).validate(document)
    assert document["counts"] == {"captures": 2, "ok": 1, "failed": 1, "resumed": 0}
    failed = [json.loads(t) for t in (out / "batch.jsonl").read_text().splitlines()][1]
    assert failed["status"] == "failed" and "broken.sigmf-meta: malformed" in failed["error"]
    assert "\n" not in failed["error"] and failed["outputs"] == [] and failed["folder"] is None
    assert "iqsift: error: " in printed.err and "broken.sigmf-meta" in printed.err
    assert_same_as_reference(out / "south", reference / "south")
    assert sorted(p.name for p in out.iterdir()) == ["activity.csv", "batch.jsonl", "south"]  # no partial folder


@contextlib.contextmanager
def started(*args: str, cwd: Path):
    """A `dask` command as a separate process, stopped (SIGTERM, then SIGKILL) on exit."""
    dask = Path(sys.executable).with_name("dask")
    process = subprocess.Popen([str(dask), *args], cwd=cwd, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    try:
        yield process
    finally:
        process.terminate()
        try:
            process.wait(timeout=20)
        except subprocess.TimeoutExpired:
            process.kill()
            process.wait(timeout=20)


def test_an_external_scheduler_and_worker_give_the_same_outputs(captures, reference, tmp_path, capsys):
    scheduler_file = tmp_path / "scheduler.json"
    with started("scheduler", "--scheduler-file", str(scheduler_file), "--host", "127.0.0.1", "--port", "0",
                 "--no-dashboard", cwd=tmp_path) as scheduler, \
         started("worker", "--scheduler-file", str(scheduler_file), "--nworkers", "1", "--nthreads", "1",
                 "--host", "127.0.0.1", "--no-dashboard", cwd=tmp_path):
        deadline = time.monotonic() + 60
        while not scheduler_file.exists() and scheduler.poll() is None and time.monotonic() < deadline:
            time.sleep(0.05)
        assert scheduler_file.exists(), "dask scheduler did not start"
        out = tmp_path / "batch"
        status = main(["batch", "--manifest", str(captures / "list.txt"), "--plan", str(captures / "vhf.toml"),
                       "-o", str(out), "--scheduler-file", str(scheduler_file), "--json", "-q"])
    assert status == 0
    document = json.loads(capsys.readouterr().out)
    assert document["cluster"]["kind"] == "scheduler_file"
    assert document["cluster"]["address"].startswith("tcp://127.0.0.1:")
    lines = assert_complete_batch(out, reference, ["north", "south", "shortwave"])
    assert len({line["worker"] for line in lines}) == 1
