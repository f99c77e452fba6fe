"""iqsift: pull AM-family voice channels out of recorded IQ and real IF captures.

The public API, for scripts and test benches::

    from iqsift import open_capture, make_channel, Receiver

    capture = open_capture("sample_captures/vhf_airband.sigmf-meta")
    channel = make_channel(freq="127.35M", emission="6K00A3E")
    result = Receiver.for_capture(capture, channel, spectra=True).run(capture)
    result.audio, result.report, result.spectra
"""

__version__ = "0.1.0"

from .jobs import ChannelMeasurement, measure_channel  # noqa: E402
from .captures import Capture, SigMFWriter, AudioWriter, open_capture  # noqa: E402
from .channel import Channel, make_channel  # noqa: E402
from .emission import Emission, parse_emission  # noqa: E402
from .errors import (  # noqa: E402
    CaptureError,
    InputError,
    IqsiftError,
    IqsiftWarning,
    OutputExistsError,
    ParameterError,
)
from .extractor import Extractor  # noqa: E402
from .receiver import Receiver, ReceiverReport, ReceiverResult, design_channel  # noqa: E402
from .spectra import Spectrum  # noqa: E402
from .units import parse_frequency  # noqa: E402

__all__ = [
    "AudioWriter",
    "Capture",
    "CaptureError",
    "Channel",
    "ChannelMeasurement",
    "Emission",
    "Extractor",
    "InputError",
    "IqsiftError",
    "IqsiftWarning",
    "OutputExistsError",
    "ParameterError",
    "Receiver",
    "ReceiverReport",
    "ReceiverResult",
    "SigMFWriter",
    "Spectrum",
    "__version__",
    "design_channel",
    "make_channel",
    "measure_channel",
    "open_capture",
    "parse_emission",
    "parse_frequency",
]
