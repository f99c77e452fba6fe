"""Command-line interface: ``iqsift COMMAND ...``.

A thin layer over the library. Every error iqsift raises on purpose, and every
operating-system error on a named file, becomes one line on stderr
(``iqsift: error: ...``) and exit status 2, with no traceback; warnings become
one ``iqsift: warning: ...`` line each. SIGINT and SIGTERM stop a run with one
line (``iqsift: interrupted by SIGINT``) and status 130 or 143, leaving no output,
temporary file or new folder behind.

Importing this package is cheap: the typer application, the commands and the
library behind them are imported by :func:`main` (or on first use of ``app``),
so that a signal arriving while they load is already handled.
"""

from __future__ import annotations

import sys
import warnings
from typing import TYPE_CHECKING, Any, TextIO

from .interrupts import Interrupted, ignore_interrupts, raise_on_interrupts

if TYPE_CHECKING:
    from typer import Typer

__all__ = ["app", "main"]


def _show_warning(message: Warning | str, category: type[Warning], filename: str, lineno: int,
                  file: TextIO | None = None, line: str | None = None) -> None:
    sys.stderr.write(f"iqsift: warning: {message}\n")


def load_app() -> "Typer":
    """The typer application with every command registered."""
    from . import (  # noqa: F401  (each registers a command)
        batch_cmd,
        demod,
        design_cmd,
        extract_cmd,
        info,
        measure_cmd,
        survey_cmd,
        synth_cmd,
    )
    from .app import app as application

    return application


def __getattr__(name: str) -> Any:
    if name == "app":
        return load_app()
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


def main(argv: list[str] | None = None) -> int:
    """Run the CLI with ``argv`` (default: ``sys.argv[1:]``); returns the exit status.

    While it runs, SIGINT and SIGTERM stop the command cleanly (status 130 or 143). Afterwards the
    previous signal handlers are restored, unless ``argv`` is None (the program's own run), when
    the process is about to exit and further stop signals are ignored.
    """
    restore = None
    try:
        restore = raise_on_interrupts()  # first: everything after this may be interrupted cleanly
        return _run(list(sys.argv[1:] if argv is None else argv))
    except Interrupted as exc:
        ignore_interrupts()
        sys.stderr.write(f"iqsift: interrupted by {exc.signal_name}\n")
        return exc.exit_status
    except KeyboardInterrupt:  # SIGINT before the handler above was in place
        ignore_interrupts()
        sys.stderr.write("iqsift: interrupted by SIGINT\n")
        return 130
    finally:
        if argv is None:  # running as the program: the run is over, and no late signal may cut the exit short
            ignore_interrupts()
        elif restore is not None:  # called from Python: the caller's handlers come back
            restore()


def _run(args: list[str]) -> int:
    """Parse ``args``, run the command, and map iqsift's errors to one line and status 2."""
    from typer import Abort, Exit

    from ..errors import IqsiftError
    from .options import in_flag_words

    try:  # typer >= 0.20 vendors click; older releases depend on it
        from typer._click.exceptions import ClickException
    except ImportError:  # pragma: no cover - depends on the installed typer
        from click import ClickException  # type: ignore[import-not-found, no-redef, assignment, unused-ignore]

    warnings.showwarning = _show_warning
    try:
        status = load_app()(args=args or ["--help"], prog_name="iqsift", standalone_mode=False)
    except Exit as exc:
        return int(exc.exit_code or 0)
    except Abort:
        sys.stderr.write("iqsift: aborted\n")
        return 130
    except ClickException as exc:
        sys.stderr.write(f"iqsift: error: {exc.format_message()} (see iqsift --help)\n")
        return 2
    except IqsiftError as exc:
        sys.stderr.write(f"iqsift: error: {in_flag_words(str(exc), exc.parameters)}\n")
        return 2
    except OSError as exc:
        where = f"{exc.filename}: " if exc.filename else ""
        sys.stderr.write(f"iqsift: error: {where}{exc.strerror or exc}\n")
        return 2
    # in non-standalone mode typer returns the status of an Exit raised inside a command
    return status if isinstance(status, int) else 0
