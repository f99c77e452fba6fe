"""Figures drawn on two cores: some in a forked child process, the rest in this one.

Drawing a matplotlib figure is Python work that holds the interpreter lock, so a thread
does not run it beside another; a child process does. :func:`draw_figures` forks once
(the parent's memory is shared copy-on-write: no pickling of spectra, and the figures
drawn are the same as drawn here), the child draws its share into memory and sends the
file contents back through a pipe, and writes nothing itself: every file is written by
the caller, through its :class:`~iqsift.captures.OutputSet`. So an interrupt still leaves
nothing behind: the parent ends the child (SIGKILL) and waits for it before its
OutputSet removes the temporary files; the child ignores no signal and dies of SIGINT or
SIGTERM at once, with nothing on disk to clean. If the child fails, or ``fork`` is not
available (not POSIX), its share is drawn here.
"""

from __future__ import annotations

import io
import os
import pickle
import signal
import warnings
from typing import IO, Any, Callable, NoReturn, Sequence

__all__ = ["Draw", "draw_figures"]

Draw = Callable[[IO[bytes]], Any]
"""Draws one figure into the open binary file it is given."""


def _drawn(draw: Draw) -> bytes:
    buffer = io.BytesIO()
    draw(buffer)
    return buffer.getvalue()


def _child(jobs: Sequence[tuple[str, Draw]], write_fd: int) -> NoReturn:
    """In the forked child: draw ``jobs``, send ``{name: bytes}`` down the pipe, end without clean-up."""
    status = 1
    try:
        for number in (signal.SIGINT, signal.SIGTERM):
            signal.signal(number, signal.SIG_DFL)  # the parent's handlers would unwind the parent's job here
        signal.pthread_sigmask(signal.SIG_UNBLOCK, {signal.SIGINT, signal.SIGTERM})
        data = pickle.dumps({name: _drawn(draw) for name, draw in jobs})
        with os.fdopen(write_fd, "wb") as pipe:
            pipe.write(data)
        status = 0
    finally:
        os._exit(status)  # no atexit handlers, no flushing of the parent's buffers, no OutputSet clean-up


def draw_figures(jobs: Sequence[tuple[str, Draw]], child_share: Sequence[str]) -> dict[str, bytes]:
    """Draw every job; those named in ``child_share`` in a forked child process at the same time.

    Parameters
    ----------
    jobs : sequence of (name, draw)
        ``draw(fh)`` writes one figure into the binary file ``fh``.
    child_share : sequence of str
        Names of the jobs to draw in the child (the rest are drawn here, meanwhile).

    Returns
    -------
    dict
        File contents (bytes) by job name, for every job.
    """
    theirs = [(name, draw) for name, draw in jobs if name in child_share]
    ours = [(name, draw) for name, draw in jobs if name not in child_share]
    if not theirs or not hasattr(os, "fork"):
        return {name: _drawn(draw) for name, draw in jobs}
    stop = {signal.SIGINT, signal.SIGTERM}
    read_fd, write_fd = os.pipe()
    # signals held across the fork: the child must not run the parent's handlers before it replaces them
    held = signal.pthread_sigmask(signal.SIG_BLOCK, stop)
    parent = os.getpid()
    try:
        with warnings.catch_warnings():  # the child only draws; it takes no lock the FFT or reader threads hold
            warnings.simplefilter("ignore", DeprecationWarning)
            pid = os.fork()
        if pid == 0:
            os.close(read_fd)
            _child(theirs, write_fd)
    except BaseException as exc:
        if os.getpid() != parent:  # whatever happens in the child ends the child, never runs the parent's code
            os._exit(1)
        signal.pthread_sigmask(signal.SIG_SETMASK, held)
        os.close(read_fd)
        os.close(write_fd)
        if isinstance(exc, OSError):  # no fork today (out of processes or memory): draw everything here
            return {name: _drawn(draw) for name, draw in jobs}
        raise
    os.close(write_fd)
    status = None
    with os.fdopen(read_fd, "rb") as pipe:
        try:
            signal.pthread_sigmask(signal.SIG_SETMASK, held)
            drawn = {name: _drawn(draw) for name, draw in ours}
            data = pipe.read()
            _, status = os.waitpid(pid, 0)
        finally:
            if status is None:  # interrupted or failed here: the child must be gone before any clean-up
                try:
                    os.kill(pid, signal.SIGKILL)
                    os.waitpid(pid, 0)
                except (ProcessLookupError, ChildProcessError):
                    pass
    theirs_drawn = pickle.loads(data) if status == 0 and data else {}
    for name, draw in theirs:  # the child's share, or what it did not deliver, drawn here
        drawn[name] = theirs_drawn[name] if name in theirs_drawn else _drawn(draw)
    return {name: drawn[name] for name, _ in jobs}
