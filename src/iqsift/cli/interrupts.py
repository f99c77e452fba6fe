"""SIGINT and SIGTERM as one exception the command line can report and map to an exit status.

Python turns SIGINT into :class:`KeyboardInterrupt`, which the typer/click layer swallows (it
turns it into an exit status of its own, without a message), and leaves SIGTERM at the
operating system's default, which ends the process at once: no ``finally`` runs, so temporary
output files stay behind. While a command runs, both signals raise :class:`Interrupted`
instead: a ``BaseException`` that no ``except Exception`` catches, so it unwinds the job and
its :class:`~iqsift.captures.OutputSet` removes every temporary file and new folder on the way.

A handler's exception can still be lost: it is raised wherever the interpreter happens to be,
and some C code clears it (the initialisation of compiled extension modules does; seen while
scipy loads), or Python reports it as "Exception ignored" (in a weakref callback or a ``__del__``).
So the process sends itself the same signal again a moment later, and again, until the run has
stopped and :func:`ignore_interrupts` ends the repeats; and the "Exception ignored" report of a
lost :class:`Interrupted`, a traceback, is not printed.

Standard only in convention: a process ended by signal N reports status 128 + N (130 for
SIGINT, 143 for SIGTERM), as POSIX shells show it.
"""

from __future__ import annotations

import os
import signal
import sys
import threading
from types import FrameType
from typing import Any, Callable

__all__ = ["Interrupted", "end_input_on_sigint", "ignore_interrupts", "raise_on_interrupts"]

STOP_SIGNALS = (signal.SIGINT, signal.SIGTERM)
REPEAT_S = 0.25
"""Delay before a stop signal is sent again (s): longer than the clean-up an interrupt starts."""

_repeat: list[threading.Timer] = []
"""The pending repeat of the last stop signal (none or one)."""


class Interrupted(BaseException):
    """The run was stopped by a signal.

    Attributes
    ----------
    signum : int
        The signal received (SIGINT or SIGTERM).
    """

    def __init__(self, signum: int) -> None:
        super().__init__(signum)
        self.signum = int(signum)

    @property
    def signal_name(self) -> str:
        """``"SIGINT"`` or ``"SIGTERM"``."""
        return signal.Signals(self.signum).name

    @property
    def exit_status(self) -> int:
        """128 + the signal number: 130 for SIGINT, 143 for SIGTERM."""
        return 128 + self.signum


def _raise(signum: int, frame: FrameType | None) -> None:
    _cancel_repeat()
    timer = threading.Timer(REPEAT_S, os.kill, (os.getpid(), signum))
    timer.daemon = True
    timer.start()
    _repeat.append(timer)
    raise Interrupted(signum)


def _cancel_repeat() -> None:
    while _repeat:
        _repeat.pop().cancel()


def ignore_interrupts() -> None:
    """Ignore further stop signals and end the repeats: the run is stopping, and its last words must not be cut."""
    _cancel_repeat()
    if threading.current_thread() is threading.main_thread():
        for number in STOP_SIGNALS:
            signal.signal(number, signal.SIG_IGN)


def raise_on_interrupts() -> Callable[[], None]:
    """Make SIGINT and SIGTERM raise :class:`Interrupted`; returns a function restoring the previous handlers.

    Outside the main thread (where Python runs no signal handlers) nothing changes.
    """
    if threading.current_thread() is not threading.main_thread():
        return lambda: None
    previous = {number: signal.getsignal(number) for number in STOP_SIGNALS}
    previous_hook = sys.unraisablehook

    def report_unraisable(unraisable: Any) -> None:
        if not isinstance(unraisable.exc_value, Interrupted):  # a lost interrupt comes again: no report
            previous_hook(unraisable)

    sys.unraisablehook = report_unraisable
    for number in STOP_SIGNALS:
        signal.signal(number, _raise)

    def restore() -> None:
        _cancel_repeat()
        for number, handler in previous.items():
            signal.signal(number, signal.SIG_DFL if handler is None else handler)
        sys.unraisablehook = previous_hook

    return restore


def end_input_on_sigint() -> None:
    """While standard input is the capture, SIGINT ends the input instead of the run.

    With a live stream, SIGINT is how a user stops: the samples read so far are processed and the
    outputs completed and kept (exit 0), as at the end of the input
    (:func:`iqsift.captures.stream.request_stop`). A second SIGINT, or SIGTERM, still stops the run
    and leaves nothing behind (exit 130/143). Call after :func:`raise_on_interrupts`; its restore
    function puts the previous handler back.
    """
    if threading.current_thread() is not threading.main_thread():
        return
    from ..captures.stream import request_stop, stop_requested

    def end_input(signum: int, frame: FrameType | None) -> None:
        if stop_requested():
            _raise(signum, frame)  # the second: stop the run
        request_stop()  # raises inside a waiting read, ending it

    signal.signal(signal.SIGINT, end_input)
