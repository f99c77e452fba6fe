"""iqsift: pull AM-family voice channels out of recorded IQ and real IF captures.

The public API, for scripts and test benches::

    from iqsift import open_capture, make_channel, Receiver

    capture = open_capture("sample_captures/vhf_airband.sigmf-meta")
    channel = make_channel(freq="127.35M", emission="6K00A3E")
    result = Receiver.for_capture(capture, channel, spectra=True).run(capture)
    result.audio, result.report, result.spectra

The names are imported on first use (PEP 562 module ``__getattr__``): ``import iqsift`` loads
neither numpy, scipy nor matplotlib, so the command line starts quickly and a script pays only
for what it uses.
"""

from __future__ import annotations

import importlib
from typing import TYPE_CHECKING, Any

__version__ = "0.1.0"

if TYPE_CHECKING:  # what type checkers and IDEs see; at run time __getattr__ imports on demand
    from .captures import AudioWriter, Capture, SigMFWriter, open_capture
    from .channel import Channel, make_channel
    from .emission import Emission, parse_emission
    from .errors import (
        CaptureError,
        InputError,
        IqsiftError,
        IqsiftWarning,
        OutputExistsError,
        ParameterError,
    )
    from .extractor import Extractor
    from .jobs import ChannelMeasurement, measure_channel
    from .receiver import Receiver, ReceiverReport, ReceiverResult, design_channel
    from .spectra import Spectrum
    from .units import parse_frequency

_HOMES: dict[str, str] = {
    "AudioWriter": ".captures",
    "Capture": ".captures",
    "SigMFWriter": ".captures",
    "open_capture": ".captures",
    "Channel": ".channel",
    "make_channel": ".channel",
    "Emission": ".emission",
    "parse_emission": ".emission",
    "CaptureError": ".errors",
    "InputError": ".errors",
    "IqsiftError": ".errors",
    "IqsiftWarning": ".errors",
    "OutputExistsError": ".errors",
    "ParameterError": ".errors",
    "Extractor": ".extractor",
    "ChannelMeasurement": ".jobs",
    "measure_channel": ".jobs",
    "Receiver": ".receiver",
    "ReceiverReport": ".receiver",
    "ReceiverResult": ".receiver",
    "design_channel": ".receiver",
    "Spectrum": ".spectra",
    "parse_frequency": ".units",
}
"""Public name -> the module that defines it (relative to this package)."""

__all__ = sorted([*_HOMES, "__version__"])


def __getattr__(name: str) -> Any:
    """Import a public name from its module on first use, and keep it here for the next."""
    home = _HOMES.get(name)
    if home is None:
        raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
    value = getattr(importlib.import_module(home, __name__), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted({*globals(), *__all__})
