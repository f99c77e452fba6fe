"""The ``survey`` job: find the emissions in a capture, measure them, and optionally write a channel plan."""

from __future__ import annotations

import dataclasses
import os
import warnings
from dataclasses import dataclass
from typing import Any, Iterable, Iterator

import numpy as np

from ..captures import Capture, OutputSet, annotated_metadata, check_annotation_path, input_files
from ..jsonable import dumps
from ..errors import IqsiftWarning, ParameterError
from ..rasters import Raster, parse_raster
from ..survey import (
    DEFAULT_THRESHOLD_DB,
    FrequencyReference,
    Surveyor,
    SurveyResult,
    estimate_from_carrier,
    estimate_from_raster,
    feed_capture,
    survey_plan_text,
)
from ..units import parse_positive_hz
from .annotations import emission_annotations
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

__all__ = ["SurveyReport", "survey_file", "COVERAGE_FACTOR"]

#: An estimated reference error is applied when it exceeds this many standard uncertainties.
COVERAGE_FACTOR = 2.0


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
    frequency_reference : FrequencyReference or None
        The receiver reference error estimated from the carriers (with a raster or a reference
        carrier), or None when not asked for.
    """

    survey: SurveyResult
    capture: CaptureSummary
    selection: SelectionSummary
    plan: str | None
    frequency_reference: FrequencyReference | None = None
    annotations: str | None = None

    schema = "survey-v1"

    def to_dict(self) -> dict[str, Any]:
        """The JSON ``iqsift survey --json`` prints."""
        return stamped(self.schema, {**self.survey.to_dict(), "capture": self.capture.to_dict(),
                                     "selection": self.selection.to_dict(), "plan": self.plan,
                                     "frequency_reference": (None if self.frequency_reference is None
                                                             else self.frequency_reference.to_dict()),
                                     "annotations": self.annotations})


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
    ppm: float | None = None,
    reference_carrier: str | float | None = None,
    annotate: str | os.PathLike[str] | None = None,
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
    start, duration, allow_nonfinite, force, progress, format, rate, center, strict, verify, ppm, iq_correct
        As for :func:`demod_file`.
    reference_carrier : float or str, optional
        True frequency (Hz) of one transmitter in the capture: the receiver reference error is
        estimated from it. Without it, a ``raster`` estimates the error from the carriers that agree
        on it (:mod:`iqsift.survey.reference`). Unless ``ppm`` is given, an estimate is applied:
        frequencies, snapping and the plan (``[defaults] ppm``) are then true ones.
    annotate : path, optional
        Write SigMF metadata of the same recording (``.sigmf-meta``, in the data file's folder) with one
        annotation per emission (:func:`~iqsift.jobs.annotations.emission_annotations`).
    """
    if isinstance(capture, str) and capture == "-":
        raise ParameterError("survey: needs a capture file; standard input (-) has no known length to choose the "
                             "resolution from (use info, demod, measure or extract on a live stream)")
    raster_obj = parse_raster(raster) if isinstance(raster, str) else raster
    reference_hz = (None if reference_carrier is None
                    else parse_positive_hz(reference_carrier, "reference_carrier"))
    protect = input_files(capture) if isinstance(capture, (str, os.PathLike)) else capture.files
    with OutputSet(force=force, protect=protect) as outputs:
        plan_tmp = outputs.reserve(plan_out) if plan_out else None  # checked before any work
        with opened(capture, format=format, rate=rate, center=center, strict=strict,
                    verify=verify, ppm=ppm, iq_correct=iq_correct) as cap:
            annotate_tmp = outputs.reserve(check_annotation_path(cap, annotate)) if annotate else None
            selection = cap.select(start, duration)
            cap.check_ahead(selection.start, selection.count)  # hash the data while the job prepares
            if raster_obj is not None and cap.center_for(selection) is None:
                raise ParameterError(
                    f"raster: {cap.path} has no centre frequency, so frequencies are offsets; give one with center",
                    parameters=("raster", "center"))
            if reference_hz is not None and cap.center_for(selection) is None:
                raise ParameterError(
                    f"reference_carrier: {cap.path} has no centre frequency, so frequencies are offsets; "
                    "give one with center", parameters=("reference_carrier", "center"))

            def with_progress(blocks: Iterator[np.ndarray], total: int) -> Iterable[np.ndarray]:
                return counted(blocks, total, progress)

            sv = feed_capture(cap, threshold_db=threshold_db, raster=raster_obj, selection=selection,
                              resolution_hz=resolution_hz, nonfinite=nonfinite_policy(allow_nonfinite),
                              wrap_blocks=with_progress)
            found, reference = _analysed(sv, cap, raster_obj, reference_hz, correct=ppm is None)
            plan_ppm = cap.reference_ppm if ppm is not None or (reference is not None and reference.applied) else None
            written = annotated = None
            if not found.emissions:  # no emission: no plan and no annotations, nothing left behind
                outputs.abort()
                if annotate_tmp is not None:
                    warnings.warn(f"{annotate}: not written: no emission found to annotate", IqsiftWarning)
            else:
                if plan_tmp is not None:
                    plan_tmp.write_text(survey_plan_text(found, capture_name=cap.path.name, ppm=plan_ppm),
                                        encoding="utf-8")
                    written = str(plan_out)
                if annotate_tmp is not None:
                    doc = annotated_metadata(cap, str(annotate), emission_annotations(cap, selection, found))
                    annotate_tmp.write_text(dumps(doc), encoding="utf-8")
                    annotated = str(annotate)
            return SurveyReport(found, CaptureSummary.of(cap), SelectionSummary.of(cap, selection), written,
                                reference, annotated)



def _analysed(sv: Surveyor, cap: Capture, raster: Raster | None, reference_hz: float | None, *,
              correct: bool) -> tuple[SurveyResult, FrequencyReference | None]:
    """The survey's result and its reference-error estimate (None when neither raster nor carrier is given).

    With ``correct``, an estimate that differs from the correction already applied by more than
    :data:`COVERAGE_FACTOR` times its standard uncertainty is applied: the spectra are re-read on the
    corrected scale and ``cap`` is corrected too (its summary then records the total correction). A
    smaller one cannot be told from zero (GUM, JCGM 100:2008, 6.3: k = 2 for about 95 % coverage),
    and applying it would only pull the carriers' own errors towards the raster.
    """
    if raster is None and reference_hz is None:
        return sv.result(), None
    with warnings.catch_warnings():  # the carriers as measured: their snapping is not the answer
        warnings.simplefilter("ignore")
        measured = sv.result(snap=False)
    bin_hz = (measured.fine_spectrum or measured.spectrum).bin_width_hz
    if reference_hz is not None:
        reference = estimate_from_carrier(measured.emissions, reference_hz, bin_hz=bin_hz, base_ppm=cap.reference_ppm)
    else:
        assert raster is not None
        reference = estimate_from_raster(measured.emissions, raster, bin_hz=bin_hz, base_ppm=cap.reference_ppm)
    if reference.error_ppm is None or reference.added_ppm is None:
        if reference_hz is not None:  # asked for by name; a raster's estimate is a by-product, its reason in the JSON
            warnings.warn(f"survey: no receiver reference error estimated ({reference.method}): {reference.reason}",
                          IqsiftWarning, stacklevel=3)
        return sv.result(), reference
    assert reference.uncertainty_ppm is not None
    why = None
    if not correct:
        why = "the error was given (ppm)"
    elif abs(reference.added_ppm) <= COVERAGE_FACTOR * reference.uncertainty_ppm:
        why = f"within {COVERAGE_FACTOR:g} standard uncertainties of the correction in force"
    if why is not None:
        return sv.result(), dataclasses.replace(reference, extra={**reference.extra, "not_applied": why})
    found = sv.result(reference_ppm=reference.added_ppm)
    cap.correct_reference(reference.error_ppm)
    return found, dataclasses.replace(reference, applied=True)
