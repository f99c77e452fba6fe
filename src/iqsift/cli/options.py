"""Every command-line option, defined once, and how library parameter names read as flags.

Commands take their options from here, so one option means the same and reads the same in every
command. The library speaks of its Python parameters (``tone_hz``); :func:`in_flag_words` turns an
error message about them into the user's words (``--tone``).
"""

from __future__ import annotations

import re
from typing import Any, Optional

import typer

__all__ = ["FLAGS", "PHRASES", "in_flag_words", "OptStr"]

OptStr = Optional[str]

# -- reading a capture --------------------------------------------------------------------------
CaptureArgument = typer.Argument(
    ..., metavar="CAPTURE", help="Capture file (SigMF, WAV/FLAC, or raw); - reads raw samples from standard input.")
FormatOption = typer.Option(
    None, "--format", help="Datatype of a raw capture (SigMF name: cf32_le, ci16_le, cu8 ...)."
)
RateOption = typer.Option(None, "--rate", help="Sample rate in samples/s (SI suffix allowed: 2.4M); required for raw files.")
CenterOption = typer.Option(None, "--center", help="Centre frequency of the capture in Hz (e.g. 127.5M).")
StrictOption = typer.Option(False, "--strict", help="Refuse a data file that is not a whole number of samples.")
StartOption = typer.Option(None, "--start", help="Start time in s (or samples: 48000sa).")
DurationOption = typer.Option(None, "--duration", help="Duration in s (or samples: 48000sa).")
NonfiniteOption = typer.Option(False, "--allow-nonfinite", help="Replace NaN/Inf samples by 0 instead of refusing.")
NoVerifyOption = typer.Option(
    False, "--no-verify",
    help="Do not check the data against the SHA-512 its SigMF metadata records (core:sha512). The check runs "
         "while the whole capture streams through; it is skipped anyway when --start/--duration select a part.",
)
PpmOption = typer.Option(
    None, "--ppm", metavar="P",
    help="Receiver reference error in ppm (positive: runs fast, transmitters appear low). Corrects the "
         "capture's sample rate and centre, so every frequency tuned, measured or reported is true.",
)
IqCorrectOption = typer.Option(
    False, "--iq-correct",
    help="Estimate the IQ gain/phase imbalance and DC offset (a first pass over a file, a running estimate on "
         "standard input) and remove them before any processing; reports record the correction.",
)

# -- output and terminal ------------------------------------------------------------------------
JsonOption = typer.Option(False, "--json", help="Print a machine-readable JSON result on stdout.")
QuietOption = typer.Option(False, "--quiet", "-q", help="No progress bar.")
ForceOption = typer.Option(False, "--force", help="Overwrite existing output files.")
PlotFormatOption = typer.Option("png", "--plot-format", help="Plot file format: png or svg.")
PerChannelSpectraOption = typer.Option(False, "--spectra", help="Also write stage spectra plots per channel.")
PerChannelBasebandOption = typer.Option(False, "--baseband", help="Also write each channel's baseband as SigMF.")


def annotate_option(per: str) -> Any:
    """``--annotate OUT.sigmf-meta``: SigMF metadata of the recording with one annotation per ``per``."""
    return typer.Option(None, "--annotate", metavar="OUT.sigmf-meta",
                        help=f"Write SigMF metadata of the same recording with one annotation per {per}.")


HtmlOption = typer.Option(False, "--html", help="Also write report.html: channel table, activity timeline, audio players, stage spectra.")

# -- the channel --------------------------------------------------------------------------------
FreqOption = typer.Option(None, "--freq", help="Carrier frequency in Hz, absolute (e.g. 127.35M).")
OffsetOption = typer.Option(None, "--offset", help="Carrier offset from the capture centre in Hz (e.g. -25k).")
BandwidthOption = typer.Option(None, "--bandwidth", "-b", help="Channel (necessary) bandwidth in Hz (default 6k).")
EmissionOption = typer.Option(None, "--emission", "-e", help="ITU emission designator, e.g. 6K00A3E, 2K70J3E.")
ModeOption = typer.Option(None, "--mode", "-m", help="Detector: envelope, coherent, usb, lsb, dsb or isb "
                          "(independent sidebands: stereo audio, left = lower).")
AudioRateOption = typer.Option("16000", "--audio-rate", help="Output audio rate in samples/s.")
EngineOption = typer.Option("fft", "--engine", help="Front end: fft (fast convolution) or polyphase (time domain).")
AgcOption = typer.Option(None, "--agc/--no-agc", help="Automatic gain control (default: on for usb/lsb/dsb only).")

FLAGS: dict[str, str] = {
    "freq": "--freq",
    "offset": "--offset",
    "bandwidth": "--bandwidth",
    "emission": "--emission",
    "mode": "--mode",
    "audio_rate": "--audio-rate",
    "transition": "--transition",
    "format": "--format",
    "rate": "--rate",
    "rate_hz": "--rate",
    "center": "--center",
    "start": "--start",
    "duration": "--duration",
    "allow_nonfinite": "--allow-nonfinite",
    "force": "--force",
    "plot_format": "--plot-format",
    "engine": "--engine",
    "squelch_db": "--squelch",
    "tone_hz": "--tone",
    "weighting": "--weighting",
    "x_db": "--x-db",
    "threshold_db": "--threshold",
    "raster": "--raster",
    "resolution_hz": "--resolution",
    "plan_out": "--plan-out",
    "out_dir": "--out-dir",
    "ripple_db": "--ripple",
    "atten_db": "--atten",
    "ppm": "--ppm",
    "reference_carrier": "--reference-carrier",
    "annotate": "--annotate",
    "iq_correct": "--iq-correct",
    "audio_format": "--audio-format",
    "reference": "--reference",
    "html": "--html",
    "output": "-o",
}
"""Python parameter name -> the flag that sets it."""

PHRASES: dict[str, str] = {
    "verify=False": "--no-verify",
}
"""Library phrases -> the flag that says the same (a boolean parameter whose flag is its negation)."""

_LEADING_NAME = re.compile(r"^([a-z][a-z0-9_]*)(?=[: ])")


def in_flag_words(message: str, parameters: tuple[str, ...] = ()) -> str:
    """``message`` with the Python parameter names it speaks of written as flags.

    The names are those listed in ``parameters`` plus a leading ``name:`` (the convention of
    iqsift's parameter errors); only names that have a flag are rewritten. The phrases of
    :data:`PHRASES` (``verify=False``) are rewritten wherever they appear.
    """
    for phrase, flag in PHRASES.items():
        message = message.replace(phrase, flag)
    names = set(parameters)
    lead = _LEADING_NAME.match(message)
    if lead:
        names.add(lead.group(1))
    for name in sorted(names & FLAGS.keys(), key=len, reverse=True):
        message = re.sub(rf"(?<![\w-]){re.escape(name)}(?![\w-])", FLAGS[name], message)
    return message
