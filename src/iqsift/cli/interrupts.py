"""SIGINT and SIGTERM as one exception the command line can report and map to an exit status.

Python turns SIGINT into :class:`KeyboardInterrupt`, which the typer/click layer swallows (it
turns it into an exit status of its own, without a message), and leaves SIGTERM at the
operating system's default, which ends the process at once: no ``finally`` runs, so temporary
output files stay behind. While a command runs, both signals raise :class:`Interrupted`
instead: a ``BaseException`` that no ``except Exception`` catches, so it unwinds the job and
its :class:`~iqsift.captures.OutputSet` removes every temporary file and new folder on the way.

Standard only in convention: a process ended by signal N reports status 128 + N (130 for
SIGINT, 143 for SIGTERM), as POSIX shells show it.
"""

from __future__ import annotations

import signal
import threading
from types import FrameType
from typing import Callable

__all__ = ["Interrupted", "raise_on_interrupts"]

STOP_SIGNALS = (signal.SIGINT, signal.SIGTERM)


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


def _raise_once(signum: int, frame: FrameType | None) -> None:
    # the first signal stops the run; later ones are ignored so that the clean-up it
    # starts (removing temporary files) is not itself cut short
    for number in STOP_SIGNALS:
        signal.signal(number, signal.SIG_IGN)
    raise Interrupted(signum)


def raise_on_interrupts() -> Callable[[], None]:
    """Make SIGINT and SIGTERM raise :class:`Interrupted`; returns a function restoring the previous handlers.

    Outside the main thread (where Python runs no signal handlers) nothing changes.
    """
    if threading.current_thread() is not threading.main_thread():
        return lambda: None
    previous = {number: signal.getsignal(number) for number in STOP_SIGNALS}
    for number in STOP_SIGNALS:
        signal.signal(number, _raise_once)

    def restore() -> None:
        for number, handler in previous.items():
            signal.signal(number, handler if handler is not None else signal.SIG_DFL)

    return restore
