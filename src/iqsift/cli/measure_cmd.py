"""``iqsift measure``: a modulation analysis report for one channel."""

from __future__ import annotations

from typing import Any, Optional

import typer

from ..channel import make_channel
from ..units import parse_positive_hz
from .app import app
from .common import ProgressBar, emit_json, live_input, reference_text
from .options import (
    AudioRateOption,
    BandwidthOption,
    CaptureArgument,
    CenterOption,
    DurationOption,
    EmissionOption,
    FormatOption,
    FreqOption,
    JsonOption,
    ModeOption,
    NonfiniteOption,
    IqCorrectOption,
    NoVerifyOption,
    OffsetOption,
    OptStr,
    PpmOption,
    QuietOption,
    RateOption,
    StartOption,
    StrictOption,
)


@app.command("measure")
def measure_command(
    capture_path: str = CaptureArgument,
    freq: OptStr = FreqOption,
    offset: OptStr = OffsetOption,
    bandwidth: OptStr = BandwidthOption,
    emission: OptStr = EmissionOption,
    mode: OptStr = ModeOption,
    tone: OptStr = typer.Option(None, "--tone", help="Test-tone frequency in Hz for SNR/SINAD/THD."),
    weighting: str = typer.Option("none", "--weighting", help="Audio noise weighting: none, psophometric or a."),
    x_db: float = typer.Option(26.0, "--x-db", help="x of the x-dB bandwidth (ITU-R SM.328), dB."),
    threshold: float = typer.Option(10.0, "--threshold", help="Activity threshold above the noise floor, dB."),
    audio_rate: str = AudioRateOption,
    start: OptStr = StartOption,
    duration: OptStr = DurationOption,
    allow_nonfinite: bool = NonfiniteOption,
    quiet: bool = QuietOption,
    json_out: bool = JsonOption,
    format: OptStr = FormatOption,
    rate: OptStr = RateOption,
    center: OptStr = CenterOption,
    strict: bool = StrictOption,
    no_verify: bool = NoVerifyOption,
    ppm: Optional[float] = PpmOption,
    iq_correct: bool = IqCorrectOption,
) -> None:
    """Measure carrier frequency error and level, modulation depth, SNR/SINAD/THD, bandwidths and activity."""
    tone_hz = None if tone is None else parse_positive_hz(tone, "--tone")
    channel = make_channel(freq=freq, offset=offset, bandwidth=bandwidth, emission=emission, mode=mode,
                           audio_rate=audio_rate, name="measured")
    from ..jobs import measure_file  # here, not at the top: `iqsift --help` stays fast

    with ProgressBar("measuring", live_input(capture_path) or quiet) as progress:
        result = measure_file(
            capture_path, channel, tone_hz=tone_hz, weighting=weighting, x_db=x_db, threshold_db=threshold,
            start=start, duration=duration, allow_nonfinite=allow_nonfinite, progress=progress,
            format=format, rate=rate, center=center, strict=strict, verify=not no_verify, ppm=ppm,
            iq_correct=iq_correct,
        ).to_dict()
    if json_out:
        emit_json(result)
    else:
        typer.echo(format_measure(result))


def _num(value: Any, fmt: str, unit: str = "") -> str:
    return "-" if value is None else f"{value:{fmt}}{unit}"


def format_measure(r: dict[str, Any]) -> str:
    """Human rendering of a measurement report."""
    ch = r["channel"]
    where = ch["frequency_hz"] if ch["frequency_hz"] is not None else ch["offset_hz"]
    lines = [f"channel        {where:.3f} Hz, {ch['bandwidth_hz']:g} Hz, {ch['mode']}; "
             f"level {_num(ch['level_dbfs'], '.2f', ' dBFS')}"]
    c = r.get("carrier")
    if c:
        lines.append(f"carrier        {c['frequency_hz']:.3f} Hz, error {c['error_hz']:+.3f} Hz "
                     f"(measured - nominal), level {_num(c['level_dbfs'], '.2f', ' dBFS')}")
    else:
        lines.append("carrier        - (suppressed-carrier mode or no carrier found)")
    m = r.get("modulation")
    if m:
        lines.append(f"modulation     depth {m['depth_percent']:.2f} % (+{m['depth_positive_percent']:.2f} % / "
                     f"-{m['depth_negative_percent']:.2f} %), tone {_num(m['tone_hz'], '.2f', ' Hz')}")
    b = r.get("bandwidth")
    if b:
        lines.append(f"bandwidth      occupied (99 %) {b['occupied_hz']:.1f} Hz, {b['x_db']:g} dB {b['x_db_hz']:.1f} Hz")
    a = r.get("audio")
    if a:
        lines.append(f"audio          SNR {_num(a['snr_db'], '.2f', ' dB')}, SINAD {_num(a['sinad_db'], '.2f', ' dB')} "
                     f"(receiver (S+N+D)/(N+D) {_num(a['receiver_sinad_db'], '.2f', ' dB')}), "
                     f"THD {_num(a['thd_percent'], '.3f', ' %')}, weighting {a['weighting']}")
    acts = r.get("activity") or []
    lines.append(f"activity       {len(acts)} segment(s)")
    for seg in acts[:20]:
        lines.append(f"  {seg['start_s']:9.3f} s - {seg['end_s']:9.3f} s  {seg['level_dbfs']:.1f} dBFS")
    if len(acts) > 20:
        lines.append(f"  ... {len(acts) - 20} more (see --json)")
    ref = reference_text(r.get("capture") or {})
    if ref:
        lines.append(f"reference      {ref}")
    return "\n".join(lines)
