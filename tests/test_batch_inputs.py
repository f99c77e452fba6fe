"""`iqsift batch` without a cluster: naming captures, globs, manifests, UTC activity times, refusals before
any work, and Dask kept out of `import iqsift`.

References: RFC 3339 (date-time with offset; SigMF core:datetime uses it with Z), Python's datetime for the
arithmetic.
"""

from __future__ import annotations

import subprocess
import sys

import pytest

from iqsift.errors import OutputExistsError, ParameterError
from iqsift.jobs.batch import (
    ActivitySegment,
    activity_segments,
    batch_files,
    capture_stem,
    expand_captures,
    parse_utc,
    read_manifest,
    utc_at,
)


def test_importing_iqsift_its_jobs_and_cli_loads_no_dask():
    code = ("import sys, iqsift, iqsift.jobs, iqsift.jobs.batch, iqsift.cli; "
            "print(sorted(m for m in sys.modules if m.split('.')[0] in ('dask', 'distributed', 'rich')))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert out.strip() == "[]"


@pytest.mark.parametrize("name, stem", [
    ("airfield.sigmf-meta", "airfield"), ("airfield.sigmf-data", "airfield"), ("airfield.sigmf", "airfield"),
    ("run1.cf32", "run1"), ("take.2.wav", "take.2"), ("noext", "noext"),
])
def test_capture_stem_is_the_name_without_sigmf_suffix_or_extension(name, stem):
    assert capture_stem(f"/data/{name}") == stem


def test_globs_expand_sorted_and_a_sigmf_pair_counts_once(tmp_path):
    for name in ("b.sigmf-meta", "b.sigmf-data", "a.sigmf-meta", "a.sigmf-data", "c.cf32"):
        (tmp_path / name).write_bytes(b"")
    found = expand_captures([str(tmp_path / "*.sigmf-*"), str(tmp_path / "c.cf32"), str(tmp_path / "a.sigmf-data")])
    assert found == [str(tmp_path / "a.sigmf-meta"), str(tmp_path / "b.sigmf-meta"), str(tmp_path / "c.cf32")]
    assert expand_captures([str(tmp_path / "missing.cf32")]) == [str(tmp_path / "missing.cf32")]  # fails later
    with pytest.raises(ParameterError, match="matches no file"):
        expand_captures([str(tmp_path / "*.wav")])


def test_manifest_lines_with_optional_plan_relative_to_the_manifest(tmp_path):
    manifest = tmp_path / "list.txt"
    manifest.write_text("# captures\n\na.sigmf-meta\n'with space.cf32'  plans/hf.toml  # own plan\n/abs/c.wav\n")
    assert read_manifest(manifest) == [(str(tmp_path / "a.sigmf-meta"), None),
                                       (str(tmp_path / "with space.cf32"), str(tmp_path / "plans/hf.toml")),
                                       ("/abs/c.wav", None)]
    manifest.write_text("a b c\n")
    with pytest.raises(ParameterError, match="line 1: got 3 fields"):
        read_manifest(manifest)
    manifest.write_text("# nothing\n")
    with pytest.raises(ParameterError, match="lists no capture"):
        read_manifest(manifest)


def test_rfc3339_times_parse_to_utc():
    assert parse_utc("2026-03-01T12:00:00Z").isoformat() == "2026-03-01T12:00:00+00:00"
    assert parse_utc("2026-03-01T12:00:00.123456789Z").microsecond == 123456  # cut to microseconds
    assert parse_utc("2026-03-01T14:30:00.5+02:30").isoformat() == "2026-03-01T12:00:00.500000+00:00"
    assert parse_utc("yesterday") is None and parse_utc(None) is None and parse_utc("2026-02-30T00:00:00Z") is None


def test_utc_of_a_capture_time_comes_from_the_segment_holding_it():
    segments = [{"sample_start": 0, "datetime": "2026-03-01T12:00:00Z"},
                {"sample_start": 1000, "datetime": "2026-03-01T13:00:00Z"},
                {"sample_start": 2000, "datetime": None}]
    assert utc_at(segments, 100.0, 2.5) == "2026-03-01T12:00:02.500000Z"
    assert utc_at(segments, 100.0, 12.25) == "2026-03-01T13:00:02.250000Z"  # second segment: its own clock
    assert utc_at(segments, 100.0, 25.0) is None  # a segment without a datetime


def test_activity_rows_from_a_report_sort_by_utc_then_capture_time():
    def report(datetime):
        return {"capture": {"sample_rate_hz": 1000.0, "segments": [{"sample_start": 0, "datetime": datetime}]},
                "channels": [{"channel": {"name": "ch1", "frequency_hz": 1e6},
                              "activity": [{"start_s": 1.0, "end_s": 2.0, "level_dbfs": -30.0}]},
                             {"channel": {"name": "ch2", "frequency_hz": None}, "activity": []}]}

    late = activity_segments(report("2026-03-01T12:00:00Z"), "late")
    early = activity_segments(report("2026-03-01T11:00:00Z"), "early")
    undated = activity_segments(report(None), "undated")
    assert late == (ActivitySegment("late", "ch1", 1e6, 1.0, 2.0, -30.0, "2026-03-01T12:00:01.000000Z",
                                    "2026-03-01T12:00:02.000000Z"),)
    ordered = sorted(undated + late + early, key=ActivitySegment.sort_key)
    assert [s.capture for s in ordered] == ["early", "late", "undated"]
    assert late[0].to_dict()["duration_s"] == 1.0


@pytest.fixture
def plan(tmp_path):
    path = tmp_path / "plan.toml"
    path.write_text('[[channel]]\nname = "c"\noffset = "0"\nemission = "6K00A3E"\n')
    return path


def test_refusals_come_before_any_cluster_starts(tmp_path, plan):
    out = tmp_path / "out"
    with pytest.raises(ParameterError, match="both write to"):
        batch_files([tmp_path / "x" / "a.cf32", tmp_path / "y" / "a.sigmf-meta"], plan, out)
    with pytest.raises(ParameterError, match="plan: none given"):
        batch_files([tmp_path / "a.cf32"], None, out)
    with pytest.raises(ParameterError, match="workers, scheduler: give one way"):
        batch_files([tmp_path / "a.cf32"], plan, out, workers=2, scheduler="tcp://127.0.0.1:1")
    bad_plan = tmp_path / "bad.toml"
    bad_plan.write_text("nonsense = 1\n")
    with pytest.raises(ParameterError, match="unknown top-level key"):
        batch_files([tmp_path / "a.cf32"], bad_plan, out)
    (out / "a").mkdir(parents=True)
    with pytest.raises(OutputExistsError, match="a: exists; pass force"):
        batch_files([tmp_path / "a.cf32"], plan, out)
    (out / "a").rmdir()
    (out / "batch.jsonl").write_text("")
    with pytest.raises(OutputExistsError, match="batch.jsonl: exists"):
        batch_files([tmp_path / "a.cf32"], plan, out)
    (out / "batch.jsonl").write_text("not json\n")
    with pytest.raises(ParameterError, match="line 1, is not a batch line"):
        batch_files([tmp_path / "a.cf32"], plan, out, resume=True)
    assert sorted(p.name for p in out.iterdir()) == ["batch.jsonl"]


def test_cli_usage_errors_exit_2_in_flag_words(run_cli, tmp_path, plan):
    status, _, err = run_cli("batch", "-o", tmp_path / "out")
    assert status == 2 and "CAPTURE" in err and "--manifest" in err
    status, _, err = run_cli("batch", tmp_path / "a.cf32", "-o", tmp_path / "out")
    assert status == 2 and "--plan: none given" in err
    status, _, err = run_cli("batch", tmp_path / "*.wav", "--plan", plan, "-o", tmp_path / "out")
    assert status == 2 and "CAPTURE: " in err and "matches no file" in err
    status, _, err = run_cli("batch", tmp_path / "a.cf32", "--plan", plan, "-o", tmp_path / "out",
                             "--workers", "2", "--scheduler", "tcp://127.0.0.1:1")
    assert status == 2 and "--workers, --scheduler: give one way" in err
    (tmp_path / "out" / "a").mkdir(parents=True)
    status, _, err = run_cli("batch", tmp_path / "a.cf32", "--plan", plan, "-o", tmp_path / "out")
    assert status == 2 and "pass --force to replace it (or --resume" in err
