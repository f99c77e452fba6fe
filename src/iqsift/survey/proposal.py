"""A channel plan proposed from a survey: one channel per detected emission, as a plan or as TOML text."""

from __future__ import annotations

from typing import Any

from ..errors import ParameterError
from ..plan import ChannelPlan, format_plan, plan_from_dict, sanitize_name
from .results import DetectedEmission, SurveyResult

__all__ = ["survey_plan_text", "survey_to_plan"]


def _plan_name(index: int, e: DetectedEmission, has_centre: bool) -> str:
    if e.channel_name:
        label = e.channel_name
    elif has_centre and e.nominal_frequency_hz > 0:
        fr = e.nominal_frequency_hz
        label = f"{fr / 1e6:.3f}" if fr >= 1e6 else f"{fr / 1e3:.2f}k"
    else:
        label = f"offset{e.offset_hz / 1e3:.2f}k"
    return sanitize_name(f"ch{index:02d}-{label}")


def survey_to_plan(
    result: SurveyResult,
    *,
    use_raster: bool = True,
    audio_rate_hz: float = 16000.0,
    squelch_db: float | None = None,
    source: str = "<survey>",
    ppm: float | None = None,
) -> ChannelPlan:
    """A channel plan with one channel per emission, as :func:`iqsift.plan.parse_plan` would read it.

    Each channel is named ``chNN-<frequency in MHz, 3 decimals>`` (or ``chNN-<ICAO
    channel name>`` with an aeronautical raster, ``chNN-offset<kHz>k`` for a capture
    without a centre frequency), tuned to the raster frequency when one was used (else
    the measured carrier), with the emission designator and the proposed detector
    (A3E → envelope, DSB-SC → dsb, single sideband → usb/lsb). Frequencies are
    absolute (``freq``, or ``channel_name`` for aeronautical names) when the capture
    has a centre frequency, else ``offset``. ``ppm``, the receiver reference error the survey's
    frequencies were corrected for, goes into ``[defaults]`` so that ``extract`` applies it too.

    Raises
    ------
    ParameterError
        If there are no emissions (a plan needs a channel).
    """
    if not result.emissions:
        raise ParameterError(
            f"{source}: no emissions found at {result.threshold_db:g} dB above the floor; there is no plan to write"
        )
    has_centre = result.center_hz is not None
    entries = []
    for i, e in enumerate(result.emissions, start=1):
        entry: dict[str, Any] = {"name": _plan_name(i, e, has_centre)}
        freq = e.nominal_frequency_hz if use_raster else e.frequency_hz
        if use_raster and e.channel_name:
            entry["channel_name"] = e.channel_name
        elif has_centre and freq > 0:
            entry["freq"] = float(freq)
        else:
            shift = result.center_hz or 0.0
            entry["offset"] = float(freq - shift)
        entry["emission"] = e.designator
        entry["mode"] = e.mode
        entry["audio_rate"] = float(audio_rate_hz)
        if squelch_db is not None:
            entry["squelch_db"] = float(squelch_db)
        entries.append(entry)
    data: dict[str, Any] = {"channel": entries}
    if ppm is not None:
        data["defaults"] = {"ppm": float(ppm)}
    return plan_from_dict(data, source)


def survey_plan_text(result: SurveyResult, *, capture_name: str = "", **kwargs: Any) -> str:
    """The plan of :func:`survey_to_plan` as TOML text (readable by :func:`iqsift.plan.parse_plan`)."""
    plan = survey_to_plan(result, **kwargs)
    what = f" of {capture_name}" if capture_name else ""
    head = (
        f"# Proposed by iqsift survey{what}: {len(result.emissions)} emission(s) at >= {result.threshold_db:g} dB "
        f"above the noise floor ({result.noise_floor_dbfs_per_hz:.1f} dBFS/Hz).\n"
        "# Classes and bandwidths are guesses from the averaged spectrum; check before relying on them.\n"
    )
    return head + format_plan(plan)
