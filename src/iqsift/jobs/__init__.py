"""One library call per command: each does exactly what its command does and returns a typed result.

The command-line interface parses options, calls one of these and prints the result; a test bench
calls them directly::

    from iqsift import make_channel
    from iqsift.jobs import demod_file, extract_file

    result = demod_file("capture.sigmf-meta", make_channel(freq="124.1M", emission="6K00A3E"), "out.wav")
    result.receiver.channel["level_dbfs"], result.to_dict()      # the JSON `iqsift demod --json` prints

    report = extract_file("capture.sigmf-meta", "plan.toml", "out/")  # what `iqsift extract` writes
    batch = batch_files(["a.sigmf-meta", "b.sigmf-meta"], "plan.toml", "runs/")  # `iqsift batch`, on Dask

A capture is given as a path (the job opens and closes it) or as an opened
:class:`~iqsift.captures.Capture`. Every result's ``to_dict()`` carries ``schema`` (the name of its
JSON Schema in ``iqsift/schemas/``) and ``iqsift_version``.
"""

from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:  # the names below are imported on first use (PEP 562): a command loads only its job
    from .batch import ActivitySegment, BatchResult, CaptureOutcome, OutputFile, batch_files
    from .common import CaptureSummary, SelectionSummary
    from .demod import DemodOutputs, DemodResult, demod_file
    from .design import DesignReport, design_report
    from .extract import ChannelResult, ExtractResult, extract_file
    from .info import InfoResult, info_file
    from .measure import WEIGHTINGS, ChannelMeasurement, MeasureResult, measure_channel, measure_file
    from .survey import SurveyReport, survey_file
    from .synth import SynthReport, synth_file

_HOMES = {
    "ActivitySegment": "batch",
    "BatchResult": "batch",
    "CaptureOutcome": "batch",
    "OutputFile": "batch",
    "batch_files": "batch",
    "CaptureSummary": "common",
    "SelectionSummary": "common",
    "DemodOutputs": "demod",
    "DemodResult": "demod",
    "demod_file": "demod",
    "DesignReport": "design",
    "design_report": "design",
    "ChannelResult": "extract",
    "ExtractResult": "extract",
    "extract_file": "extract",
    "InfoResult": "info",
    "info_file": "info",
    "WEIGHTINGS": "measure",
    "ChannelMeasurement": "measure",
    "MeasureResult": "measure",
    "measure_channel": "measure",
    "measure_file": "measure",
    "SurveyReport": "survey",
    "survey_file": "survey",
    "SynthReport": "synth",
    "synth_file": "synth",
}

__all__ = [
    "ActivitySegment",
    "BatchResult",
    "CaptureOutcome",
    "CaptureSummary",
    "ChannelResult",
    "ChannelMeasurement",
    "DemodOutputs",
    "DemodResult",
    "DesignReport",
    "ExtractResult",
    "InfoResult",
    "MeasureResult",
    "OutputFile",
    "SelectionSummary",
    "SurveyReport",
    "SynthReport",
    "WEIGHTINGS",
    "batch_files",
    "demod_file",
    "design_report",
    "extract_file",
    "info_file",
    "measure_channel",
    "measure_file",
    "survey_file",
    "synth_file",
]


def __getattr__(name: str) -> Any:
    """Import a job's module when one of its names is first used (``iqsift demod`` never loads Dask)."""
    home = _HOMES.get(name)
    if home is None:
        raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
    import importlib

    value = getattr(importlib.import_module(f".{home}", __name__), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(__all__))
