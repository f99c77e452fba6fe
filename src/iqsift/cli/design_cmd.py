"""``iqsift design``: the processing chain iqsift would build for a channel, without a capture."""

from __future__ import annotations

import typer

from ..channel import make_channel
from ..units import parse_positive_hz
from .app import app
from .common import emit_json
from .design_table import format_design
from .options import AudioRateOption, BandwidthOption, EmissionOption, EngineOption, JsonOption, ModeOption, OptStr


@app.command("design")
def design_command(
    rate: str = typer.Option(..., "--rate", help="Input sample rate in samples/s (e.g. 2.4M)."),
    bandwidth: OptStr = BandwidthOption,
    emission: OptStr = EmissionOption,
    mode: OptStr = ModeOption,
    audio_rate: str = AudioRateOption,
    offset: str = typer.Option("0", "--offset", help="Carrier offset from the capture centre in Hz."),
    ripple: float = typer.Option(0.1, "--ripple", help="Passband ripple, dB peak to peak."),
    atten: float = typer.Option(80.0, "--atten", help="Stopband attenuation, dB."),
    transition: OptStr = typer.Option(None, "--transition", help="Channel filter transition width in Hz."),
    engine: str = EngineOption,
    real: bool = typer.Option(False, "--real", help="Design for a real-valued (real IF) input."),
    json_out: bool = JsonOption,
) -> None:
    """Print the chain for a channel: stages, rates, taps, edges, measured ripple/attenuation, delay, cost."""
    fs = parse_positive_hz(rate, "--rate")
    channel = make_channel(offset=offset, bandwidth=bandwidth, emission=emission, mode=mode,
                           audio_rate=audio_rate, transition=transition)
    from ..jobs import design_report  # here, not at the top: `iqsift --help` stays fast

    result = design_report(fs, channel, real_input=real, engine=engine, ripple_db=ripple, atten_db=atten).to_dict()
    if json_out:
        emit_json(result)
        return
    d = result["design"]
    ch = result["channel"]
    typer.echo(
        f"channel: {ch['bandwidth_hz']:g} Hz {ch['mode']}, passband {ch['passband_hz'][0]:g}..{ch['passband_hz'][1]:g} Hz "
        f"around the carrier, transition {d['transition_hz']:g} Hz"
    )
    typer.echo(
        f"engine {d['engine']}: {d['rate_in_hz']:g} S/s -> {d['channel_rate_hz']:g} S/s (/{d['decimation']}) -> "
        f"{d['audio_rate_hz']:g} S/s audio; about {d['macs_per_input_sample']:.1f} multiply-adds per input sample"
    )
    typer.echo(format_design(d["stages"]))
