"""The typer application object and the options every command shares."""

from __future__ import annotations

from typing import Optional

import typer

app = typer.Typer(
    name="iqsift",
    help=(
        "Pull AM-family voice channels out of recorded IQ or real IF captures: recover audio, "
        "measure what was heard, and show the spectrum after every processing stage."
    ),
    add_completion=False,
    no_args_is_help=True,
    pretty_exceptions_enable=False,
    rich_markup_mode=None,
    context_settings={"help_option_names": ["-h", "--help"]},
)

# Options shared by every command that opens a capture.
FormatOption = typer.Option(
    None, "--format", help="Datatype of a raw capture (SigMF name: cf32_le, ci16_le, cu8 ...)."
)
RateOption = typer.Option(None, "--rate", help="Sample rate in samples/s (SI suffix allowed: 2.4M); required for raw files.")
CenterOption = typer.Option(None, "--center", help="Centre frequency of the capture in Hz (e.g. 127.5M).")
StrictOption = typer.Option(False, "--strict", help="Refuse a data file that is not a whole number of samples.")
JsonOption = typer.Option(False, "--json", help="Print a machine-readable JSON result on stdout.")
QuietOption = typer.Option(False, "--quiet", "-q", help="No progress bar.")
ForceOption = typer.Option(False, "--force", help="Overwrite existing output files.")

OptStr = Optional[str]


def _version(value: bool) -> None:
    if value:
        from .. import __version__

        typer.echo(f"iqsift {__version__}")
        raise typer.Exit(0)


@app.callback()
def _root(
    version: bool = typer.Option(False, "--version", callback=_version, is_eager=True, help="Print the version and exit."),
) -> None:
    """Pull AM-family voice channels out of recorded IQ or real IF captures."""
