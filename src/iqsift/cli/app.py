"""The typer application object."""

from __future__ import annotations

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
