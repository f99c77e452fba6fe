"""Tests of iqsift.plot_fork: figures drawn in a forked child are the bytes drawn here; failures and
interrupts leave no child behind.

External references: POSIX fork/waitpid semantics (a child has its own process id; ``waitpid``
reports ECHILD, Python's ChildProcessError, once no child is left); matplotlib's own ``savefig``
output drawn in this process is the reference for the child's bytes.
"""

from __future__ import annotations

import io
import os
import time
from pathlib import Path

import numpy as np
import pytest

from iqsift import plots
from iqsift.plot_fork import draw_figures
from iqsift.spectra import WelchAccumulator


def _pid(fh):
    fh.write(str(os.getpid()).encode())


def _children() -> set[int]:
    """Process ids whose parent is this process, zombies (not yet waited for) included, from /proc."""
    me, found = os.getpid(), set()
    for stat in Path("/proc").glob("[0-9]*/stat"):
        try:
            fields = stat.read_text().rsplit(")", 1)[1].split()
        except OSError:  # the process ended meanwhile
            continue
        if int(fields[1]) == me:  # field 4 of proc(5), the parent's id
            found.add(int(stat.parent.name))
    return found


@pytest.fixture
def no_child_left():
    """Every child a test forks has been waited for when it ends (other tests' children, e.g. a cluster's
    helpers living for the whole session, are left out)."""
    if not Path("/proc/self/stat").exists():
        pytest.skip("needs Linux /proc to list child processes")
    before = _children()
    yield
    assert _children() <= before


def test_child_share_is_drawn_in_another_process_and_returned_in_order(no_child_left):
    jobs = [("a", _pid), ("b", _pid), ("c", _pid)]
    drawn = draw_figures(jobs, child_share=["b"])
    assert list(drawn) == ["a", "b", "c"]
    assert drawn["a"] == drawn["c"] == str(os.getpid()).encode()
    assert drawn["b"] != drawn["a"] and int(drawn["b"]) > 0


@pytest.mark.parametrize("fmt", ["png", "svg"])
def test_a_figure_drawn_in_the_child_is_the_same_bytes(fmt):
    rng = np.random.default_rng(2)
    s = WelchAccumulator(48_000.0, nperseg=512, name="audio").feed(rng.standard_normal(1 << 14)).density()
    reference = io.BytesIO()
    plots.plot_stage_spectrum(s, reference, title="invented capture: ch1", fmt=fmt)

    def draw(fh):
        plots.plot_stage_spectrum(s, fh, title="invented capture: ch1", fmt=fmt)

    drawn = draw_figures([("here", draw), ("there", draw)], child_share=["there"])
    assert drawn["there"] == drawn["here"] == reference.getvalue()


def test_a_failing_child_share_is_drawn_here(no_child_left):
    parent = os.getpid()

    def fails_in_child(fh):
        if os.getpid() != parent:
            raise RuntimeError("only in the child")
        _pid(fh)

    drawn = draw_figures([("a", _pid), ("b", fails_in_child)], child_share=["b"])
    assert drawn["b"] == str(parent).encode()


def test_an_interrupt_here_ends_the_child_at_once(no_child_left):
    def slow(fh):
        time.sleep(30)

    def interrupted(fh):
        raise KeyboardInterrupt

    started = time.monotonic()
    with pytest.raises(KeyboardInterrupt):
        draw_figures([("here", interrupted), ("there", slow)], child_share=["there"])
    assert time.monotonic() - started < 10  # not waited for: killed
