"""The ``survey`` job: find the emissions in a capture, measure them, and optionally write a channel plan."""

from __future__ import annotations

import os
from dataclasses import dataclass
from typing import Any, Iterable, Iterator

import numpy as np

from ..captures import OutputSet, input_files
from ..errors import ParameterError
from ..rasters import Raster, parse_raster
from ..survey import DEFAULT_THRESHOLD_DB, SurveyResult, survey_capture, survey_plan_text
from .common import (
    CaptureArg,
    CaptureSummary,
    Progress,
    SelectionSummary,
    counted,
    nonfinite_policy,
    opened,
    stamped,
)

__all__ = ["SurveyReport", "survey_file"]


@dataclass(frozen=True)
class SurveyReport:
    """A finished survey.

    Attributes
    ----------
    survey : SurveyResult
        The emissions found, the noise floor and the spectrum used.
    capture : CaptureSummary
    selection : SelectionSummary
    plan : str or None
        The plan file written, or None (not asked for, or no emission to put in it).
    """

    survey: SurveyResult
    capture: CaptureSummary
    selection: SelectionSummary
    plan: str | None

    schema = "survey-v1"

    def to_dict(self) -> dict[str, Any]:
        """The JSON ``iqsift survey --json`` prints."""
        return stamped(self.schema, {**self.survey.to_dict(), "capture": self.capture.to_dict(),
                                     "selection": self.selection.to_dict(), "plan": self.plan})


def survey_file(
    capture: CaptureArg,
    *,
    threshold_db: float = DEFAULT_THRESHOLD_DB,
    raster: str | Raster | None = None,
    plan_out: str | os.PathLike[str] | None = None,
    resolution_hz: float | None = None,
    start: str | float | None = None,
    duration: str | float | None = None,
    allow_nonfinite: bool = False,
    force: bool = False,
    progress: Progress | None = None,
    format: str | None = None,
    rate: str | float | None = None,
    center: str | float | None = None,
    strict: bool = False,
    verify: bool = True,
    iq_correct: bool = False,
) -> SurveyReport:
    """Survey a capture in one streaming pass.

    Parameters
    ----------
    capture : path or Capture
        The capture.
    threshold_db : float
        Detection threshold, dB above the local noise floor.
    raster : str or Raster, optional
        ``"25k"``, ``"8.33k"`` (aeronautical, with ICAO channel names), ``"9k"``, ``"10k"``.
    plan_out : path, optional
        Write the proposed channel plan (TOML, as :func:`extract_file` reads it). When no
        emission is found, nothing is written and :attr:`SurveyReport.plan` is None.
    resolution_hz : float, optional
        Detection bin width (Hz); default about 60 Hz.
    start, duration, allow_nonfinite, force, progress, format, rate, center, strict, verify
        As for :func:`demod_file`.
    """
    if isinstance(capture, str) and capture == "-":
        raise ParameterError("survey: needs a capture file; standard input (-) has no known length to choose the "
                             "resolution from (use info, demod, measure or extract on a live stream)")
    raster_obj = parse_raster(raster) if isinstance(raster, str) else raster
    protect = input_files(capture) if isinstance(capture, (str, os.PathLike)) else capture.files
    with OutputSet(force=force, protect=protect) as outputs:
        plan_tmp = outputs.reserve(plan_out) if plan_out else None  # checked before any work
        with opened(capture, format=format, rate=rate, center=center, strict=strict,
                    verify=verify, iq_correct=iq_correct) as cap:
            selection = cap.select(start, duration)
            if raster_obj is not None and cap.center_for(selection) is None:
                raise ParameterError(
                    f"raster: {cap.path} has no centre frequency, so frequencies are offsets; give one with center",
                    parameters=("raster", "center"))

            def with_progress(blocks: Iterator[np.ndarray], total: int) -> Iterable[np.ndarray]:
                return counted(blocks, total, progress)

            found = survey_capture(cap, threshold_db=threshold_db, raster=raster_obj, selection=selection,
                                   resolution_hz=resolution_hz, nonfinite=nonfinite_policy(allow_nonfinite),
                                   wrap_blocks=with_progress)
            written = None
            if plan_tmp is not None:
                if found.emissions:
                    plan_tmp.write_text(survey_plan_text(found, capture_name=cap.path.name), encoding="utf-8")
                    written = str(plan_out)
                else:
                    outputs.abort()  # no emission, no plan: leave nothing behind
            return SurveyReport(found, CaptureSummary.of(cap), SelectionSummary.of(cap, selection), written)
