"""The ``design`` job: the processing chain iqsift builds for a channel, without a capture."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from ..channel import Channel
from ..receiver import ChannelDesign, design_channel
from .common import stamped

__all__ = ["DesignReport", "design_report"]


@dataclass(frozen=True)
class DesignReport:
    """A channel and the chain designed for it (stages, rates, taps, edges, ripple, attenuation, delay)."""

    channel: Channel
    design: ChannelDesign

    schema = "design-v1"

    def to_dict(self) -> dict[str, Any]:
        """The JSON ``iqsift design --json`` prints."""
        centre = None
        return stamped(self.schema, {"channel": self.channel.as_dict(centre), "design": self.design.as_dict(centre)})


def design_report(
    rate_hz: float,
    channel: Channel,
    *,
    real_input: bool = False,
    engine: str = "fft",
    ripple_db: float = 0.1,
    atten_db: float = 80.0,
) -> DesignReport:
    """Design the chain for ``channel`` in a capture at ``rate_hz`` (see :func:`iqsift.design_channel`)."""
    design = design_channel(rate_hz, channel, real_input=real_input, engine=engine, ripple_db=ripple_db,
                            atten_db=atten_db)
    return DesignReport(channel, design)
