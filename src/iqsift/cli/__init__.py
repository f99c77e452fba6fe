"""Command-line interface: ``iqsift COMMAND ...``.

A thin layer over the library. Every error iqsift raises on purpose, and every
operating-system error on a named file, becomes one line on stderr
(``iqsift: error: ...``) and exit status 2, with no traceback; warnings become
one ``iqsift: warning: ...`` line each.
"""

from __future__ import annotations

import sys
import warnings

try:  # typer >= 0.20 vendors click; older releases depend on it
    from typer._click.exceptions import ClickException
except ImportError:  # pragma: no cover - depends on the installed typer
    from click import ClickException
from typer import Abort, Exit

from ..errors import IqsiftError
from . import batch_cmd as _batch  # noqa: F401
from . import demod as _demod  # noqa: F401  (each import registers a command)
from . import design_cmd as _design  # noqa: F401
from . import extract_cmd as _extract  # noqa: F401
from . import info as _info  # noqa: F401
from . import measure_cmd as _measure  # noqa: F401
from . import survey_cmd as _survey  # noqa: F401
from . import synth_cmd as _synth  # noqa: F401
from .app import app
from .options import in_flag_words

__all__ = ["app", "main"]


def _show_warning(message, category, filename, lineno, file=None, line=None) -> None:
    sys.stderr.write(f"iqsift: warning: {message}\n")


def main(argv: list[str] | None = None) -> int:
    """Run the CLI with ``argv`` (default: ``sys.argv[1:]``); returns the exit status."""
    warnings.showwarning = _show_warning
    args = list(sys.argv[1:] if argv is None else argv)
    if not args:
        args = ["--help"]
    try:
        app(args=args, prog_name="iqsift", standalone_mode=False)
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
    except KeyboardInterrupt:
        sys.stderr.write("iqsift: interrupted\n")
        return 130
    return 0

