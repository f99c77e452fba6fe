"""``iqsift survey``: find the emissions in a capture, measure them, and propose a channel plan."""

from __future__ import annotations

import math
from typing import Any, Optional

import typer

from ..errors import ParameterError
from ..units import format_hz, parse_positive_hz
from .app import app
from .common import ProgressBar, emit_json
from .options import (
    CaptureArgument,
    CenterOption,
    DurationOption,
    ForceOption,
    FormatOption,
    IqCorrectOption,
    JsonOption,
    NoVerifyOption,
    NonfiniteOption,
    OptStr,
    PpmOption,
    QuietOption,
    RateOption,
    StartOption,
    StrictOption,
    annotate_option,
)

__all__ = ["survey", "format_survey", "format_reference", "parse_threshold", "SURVEY_THRESHOLD_DB"]

SURVEY_THRESHOLD_DB = 10.0
"""The default of ``--threshold`` as the help shows it: :data:`iqsift.survey.DEFAULT_THRESHOLD_DB`, written out
here because importing the survey package to print the help would load numpy and scipy (a test keeps the two equal)."""


def parse_threshold(text: str) -> float:
    """Read ``--threshold`` (dB above the noise floor, 3 to 100)."""
    try:
        value = float(str(text).strip().removesuffix("dB").removesuffix("db").strip())
    except ValueError:
        raise ParameterError(f"--threshold: cannot read {text!r} as a number of dB; write e.g. 10 or 12.5") from None
    if not (math.isfinite(value) and 3.0 <= value <= 100.0):
        raise ParameterError(f"--threshold: {text!r} dB; it must lie between 3 and 100 dB above the noise floor")
    return value


@app.command("survey")
def survey(
    capture_path: str = CaptureArgument,
    threshold: OptStr = typer.Option(
        None, "--threshold", "-t",
        help=f"Detection threshold in dB above the local noise floor (3 to 100; default {SURVEY_THRESHOLD_DB:g}).",
    ),
    raster: OptStr = typer.Option(
        None, "--raster", help="Snap carriers to a channel raster: 25k, 8.33k (aeronautical, with ICAO names), 9k, 10k."
    ),
    plan_out: OptStr = typer.Option(
        None, "--plan-out", help="Write the proposed channel plan (TOML, as 'extract --plan' reads it) to this file."
    ),
    resolution: OptStr = typer.Option(
        None, "--resolution", help="Detection bin width in Hz (default about 60 Hz, coarser for short captures)."
    ),
    start: OptStr = StartOption,
    duration: OptStr = DurationOption,
    allow_nonfinite: bool = NonfiniteOption,
    force: bool = ForceOption,
    quiet: bool = QuietOption,
    json_out: bool = JsonOption,
    format: OptStr = FormatOption,
    rate: OptStr = RateOption,
    center: OptStr = CenterOption,
    strict: bool = StrictOption,
    no_verify: bool = NoVerifyOption,
    ppm: Optional[float] = PpmOption,
    reference_carrier: OptStr = typer.Option(
        None, "--reference-carrier", metavar="FREQ",
        help="True frequency of one transmitter in the capture: estimate the receiver's reference error from it "
             "(without it, --raster estimates it from the carriers that agree). Applied unless --ppm is given."),
    annotate: OptStr = annotate_option("emission found"),
    iq_correct: bool = IqCorrectOption,
) -> None:
    """Find the emissions in a capture: frequency, level, bandwidth, class; optionally write a channel plan."""
    from ..jobs import survey_file  # here, not at the top: `iqsift --help` stays fast
    from ..survey import DEFAULT_THRESHOLD_DB

    threshold_db = DEFAULT_THRESHOLD_DB if threshold is None else parse_threshold(threshold)
    resolution_hz = parse_positive_hz(resolution, "--resolution") if resolution is not None else None
    with ProgressBar("survey", quiet) as progress:
        result = survey_file(
            capture_path, threshold_db=threshold_db, raster=raster, plan_out=plan_out, resolution_hz=resolution_hz,
            start=start, duration=duration, allow_nonfinite=allow_nonfinite, force=force, progress=progress,
            format=format, rate=rate, center=center, strict=strict, verify=not no_verify, ppm=ppm,
            reference_carrier=reference_carrier, annotate=annotate, iq_correct=iq_correct,
        )
    report = result.to_dict()
    if json_out:
        emit_json(report)
    else:
        typer.echo(format_survey(report))
    if plan_out and result.plan is None:
        raise ParameterError(
            f"--plan-out {plan_out}: no emissions found at {threshold_db:g} dB above the noise floor, "
            "so there is no plan to write"
        )


def _freq(value: float | None, has_centre: bool) -> str:
    if value is None:
        return "-"
    if has_centre:
        return format_hz(value, 6)
    return f"{value:+.1f} Hz"


def format_survey(report: dict[str, Any]) -> str:
    """Plain-text rendering of a survey report (a table of emissions)."""
    cap = report.get("capture") or {}
    spec = report["spectrum"]
    has_centre = report["center_hz"] is not None
    kind = "complex IQ" if report["is_complex"] else "real"
    lines = []
    if cap:
        lines.append(f"capture    {cap['path']} ({kind}, {report['sample_rate_hz']:g} S/s, "
                     f"centre {format_hz(report['center_hz']) if has_centre else 'unknown: frequencies are offsets'})")
    sel = report.get("selection")
    if sel:
        lines.append(f"analysed   {sel['duration_s']:.6g} s from {sel['start_s']:.6g} s")
    fine = (f"; carriers refined on {spec['fine_bin_width_hz']:.2f} Hz bins"
            if spec.get("fine_bin_width_hz") else "")
    lines.append(
        f"spectrum   {spec['nperseg']}-point {spec['window']}, {spec['bin_width_hz']:.2f} Hz bins, "
        f"{spec['segments_averaged']} averages (nu = {spec['dof']:.0f}){fine}"
    )
    lo, hi = report["noise_floor_range_dbfs_per_hz"]
    lines.append(
        f"floor      {report['noise_floor_dbfs_per_hz']:.1f} dBFS/Hz (median; {lo:.1f} to {hi:.1f} across the band); "
        f"threshold {report['threshold_db']:g} dB, false alarms expected {_expected(report['expected_false_detections'])}"
    )
    dc = report.get("dc_offset")
    if dc is not None:
        if dc.get("carrier_emission") is not None:
            state = f"a carrier sits there: emission {dc['carrier_emission']}"
        else:
            state = "visible, not an emission" if dc["visible"] else "below the threshold"
        lines.append(
            f"DC offset  {dc['level_dbfs']:.1f} dBFS (I {dc['i']:+.5f}, Q {dc['q']:+.5f}); "
            f"0 Hz bin {dc['spike_above_floor_db']:.1f} dB above the floor ({state})"
        )
    ref = report.get("frequency_reference")
    if ref is not None:
        lines.append(f"reference  {format_reference(ref)}")
    lines.extend(_iq_lines(report))
    emissions = report["emissions"]
    if not emissions:
        lines.append(f"emissions  none at {report['threshold_db']:g} dB above the floor")
        return "\n".join(lines)
    lines.append(f"emissions  {len(emissions)}")
    head = (f"{'#':>3}  {'frequency':>18}  {'level dBFS':>10}  {'above dB':>8}  {'occupied':>9}  "
            f"{'class':<9} {'designator':<10} {'channel':<10} note")
    lines.append(head)
    for e in emissions:
        cls = e["class"] + (f" {e['sideband']}" if e["sideband"] else "")
        if e["mode"] == "dsb":
            cls += " dsb"
        occ = e["bandwidth"]["occupied_hz"]
        channel = e["channel_name"] or (
            format_hz(e["raster"]["frequency_hz"], 4).replace(" ", "") if e.get("raster") else "-"
        )
        lines.append(
            f"{e['index']:>3}  {_freq(e['frequency_hz'], has_centre):>18}  {e['level_dbfs']:>10.1f}  "
            f"{e['peak_above_floor_db']:>8.1f}  {occ:>7.0f}Hz  {cls:<9} {e['designator']:<10} {channel:<10} "
            f"{e['confidence']}: {e['note']}"
        )
    for e in report.get("images") or []:
        lines.append(f"image      {_freq(e['frequency_hz'], has_centre)} ({e['level_dbfs']:.1f} dBFS): {e['note']}")
    if report.get("plan"):
        lines.append(f"plan       {report['plan']}")
    if report.get("annotations"):
        lines.append(f"annotated  {report['annotations']}")
    return "\n".join(lines)


def format_reference(ref: dict[str, Any]) -> str:
    """One line on the receiver's reference error estimated by a survey."""
    if ref["error_ppm"] is None:
        return f"receiver error not estimated ({ref['method']}): {ref.get('reason', '')}"
    used = len(ref["carriers_used"])
    state = "applied" if ref["applied"] else f"not applied: {ref.get('not_applied', '')}".replace("(ppm)", "(--ppm)")
    return (f"receiver error {ref['error_ppm']:+.3f} ppm (u = {ref['uncertainty_ppm']:.3f} ppm) from {used} of "
            f"{ref['carriers_considered']} carriers, {ref['method']}; {state}")


def _iq_lines(report: dict[str, Any]) -> list[str]:
    """The IQ correction applied and the image rejection, for people."""
    lines = []
    corr = (report.get("capture") or {}).get("iq_correction")
    if corr:
        lines.append(f"IQ         corrected ({corr['method']}): gain {corr['gain_imbalance_db']:+.3f} dB, "
                     f"phase {corr['phase_imbalance_deg']:+.3f} deg, DC I {corr['dc_i']:+.5f} Q {corr['dc_q']:+.5f} "
                     "removed")
    irr = report.get("image_rejection_db")
    if irr is not None and (corr or report.get("images")):
        shown = ">90" if irr > 90 else f"{irr:.1f}"
        lines.append(f"images     image rejection {shown} dB (IQ moments{', after correction' if corr else ''}); "
                     f"{len(report.get('images') or [])} mirror image(s) left out")
    return lines


def _expected(value: float) -> str:
    """An expected count of false detections for people."""
    return "< 0.01" if value < 0.01 else f"<= {value:.2g}"
