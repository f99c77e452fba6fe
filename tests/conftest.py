"""Shared test helpers."""

from __future__ import annotations

import json
from pathlib import Path

import os

import numpy as np
import pytest
from hypothesis import settings

# Reproducible property tests in CI: a fixed derandomized search (the same examples on every run); set
# HYPOTHESIS_PROFILE=explore locally to search with fresh random examples.
settings.register_profile("ci", derandomize=True, deadline=None)
settings.register_profile("explore", deadline=None)
settings.load_profile(os.environ.get("HYPOTHESIS_PROFILE", "ci"))

from iqsift.cli import main


def write_sigmf_pair(base: Path, raw: bytes, global_: dict, captures=None, annotations=None) -> Path:
    """Write a .sigmf-meta/.sigmf-data pair by hand (independent of iqsift's writer)."""
    meta = {"global": {"core:version": "1.2.6", **global_}, "captures": captures or [{"core:sample_start": 0}],
            "annotations": annotations or []}
    base.with_suffix(".sigmf-data").write_bytes(raw)
    meta_path = base.with_suffix(".sigmf-meta")
    meta_path.write_text(json.dumps(meta))
    return meta_path


@pytest.fixture
def run_cli(capsys):
    """Run the CLI in-process; returns (status, stdout, stderr)."""

    def run(*args: str):
        status = main([str(a) for a in args])
        out = capsys.readouterr()
        return status, out.out, out.err

    return run


@pytest.fixture
def rng():
    return np.random.default_rng(20261202)


@pytest.fixture(scope="module")
def client():
    """A Dask cluster of two worker processes, one thread each, on 127.0.0.1 only, for one test module
    (started here, closed when the module's tests are done; the unit states travel between them pickled)."""
    import distributed  # here: only the batch tests pay for importing Dask
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1",
                                  dashboard_address=None) as cluster, distributed.Client(cluster) as c:
        yield c


# the keys of a report that are timings of the run (equal runs differ only in these)
TIMINGS = {"processing_s", "elapsed_s", "input_throughput_msps"}


def comparable(value):
    """A report without its timings, every path reduced to its file name."""
    if isinstance(value, dict):
        return {k: comparable(v) for k, v in value.items() if k not in TIMINGS}
    if isinstance(value, list):
        return [comparable(v) for v in value]
    if isinstance(value, str) and os.sep in value:
        return os.path.basename(value)
    return value
