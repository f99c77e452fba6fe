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
    reference: OptStr = typer.Option(None, "--reference", help="The transmitted message (WAV/FLAC, >= 3 s; "
                                     "2 channels for isb): adds STOI, extended STOI and segmental SNR."),
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
            iq_correct=iq_correct, reference=reference,
        ).to_dict()
    if json_out:
        emit_json(result)
    else:
        typer.echo(format_measure(result))


def _num(value: Any, fmt: str, unit: str = "") -> str:
    return "-" if value is None else f"{value:{fmt}}{unit}"


def _audio_lines(label: str, a: dict[str, Any] | None) -> list[str]:
    if not a:
        return []
    lines = []
    if "snr_db" in a:
        lines.append(f"{label:<15}SNR {_num(a['snr_db'], '.2f', ' dB')}, SINAD {_num(a['sinad_db'], '.2f', ' dB')} "
                     f"(receiver (S+N+D)/(N+D) {_num(a['receiver_sinad_db'], '.2f', ' dB')}), "
                     f"THD {_num(a['thd_percent'], '.3f', ' %')}, tone {_num(a['tone_hz'], '.1f', ' Hz')}, "
                     f"weighting {a['weighting']}")
    if "stoi" in a:
        ref = a["reference"]
        lines.append(f"{label:<15}STOI {_num(a['stoi'], '.3f')}, ESTOI {_num(a['estoi'], '.3f')}, segmental SNR "
                     f"{_num(a['segmental_snr_db'], '.2f', ' dB')}; reference delay {ref['delay_s'] * 1e3:+.2f} ms, "
                     f"correlation {ref['correlation']:.3f}{', inverted' if ref['inverted'] else ''}")
    return lines


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
    sides = r.get("audio_sidebands") or {}
    for label, a in [("audio", r.get("audio")), *((f"audio {k:<8}", sides.get(k)) for k in ("lower", "upper"))]:
        lines += _audio_lines(label, a)
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
