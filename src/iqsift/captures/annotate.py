"""SigMF metadata of a recording with annotations added: what survey, extract and demod found in it.

The new metadata describes the same recording as the capture: its ``global`` and ``captures``
objects and its own annotations are kept as they are (checksum included: the data are the same),
iqsift's annotations are added and all are sorted by ``core:sample_start`` (SigMF 1.2: annotations
MUST be sorted so). When the new ``.sigmf-meta`` is not the data file's own name
(``<stem>.sigmf-meta`` beside ``<stem>.sigmf-data``), ``core:dataset`` names the data file; SigMF
allows only a file name there, so the metadata must be written in the data file's folder. A raw
capture gets a new ``global`` (datatype, sample rate, ``core:dataset``) and one capture segment.
Keys outside ``core:`` belong to the ``iqsift`` extension, declared in ``core:extensions``
(optional) and documented in ``docs/iqsift.sigmf-ext.md``.

Frequencies in ``core:`` keys are on the recording's own scale (that of its ``core:sample_rate``
and ``core:frequency``), so a SigMF viewer draws them where the signal shows; when a receiver
reference correction was used (:mod:`iqsift.reference`), true frequencies are in ``iqsift:`` keys
and the correction in the global ``iqsift:reference_ppm``.
"""

from __future__ import annotations

import json
import os
from pathlib import Path
from typing import Any, Mapping, Sequence

from .. import __version__
from ..errors import ParameterError
from ..reference import reference_factor
from .capture import Capture
from .sigmf import EXTENSION, SIGMF_VERSION, sigmf_paths

__all__ = ["annotated_metadata", "check_annotation_path", "recording_edges", "GENERATOR"]

GENERATOR = f"iqsift {__version__}"
"""``core:generator`` of the annotations iqsift adds."""


def _data_file(capture: Capture) -> Path:
    files = capture.files
    if not files:
        raise ParameterError("annotate: standard input has no data file for the annotations to describe; "
                             "record the stream to a file first", parameters=("annotate",))
    return files[-1]


def check_annotation_path(capture: Capture, out: str | os.PathLike[str]) -> Path:
    """``out`` if annotated metadata of ``capture`` can be written there, else a one-line error.

    Raises
    ------
    ParameterError
        For a capture that is not a SigMF pair or a raw file (WAV/FLAC, archives), a name that does not
        end in ``.sigmf-meta``, or a folder other than the data file's (``core:dataset`` is a bare name).
    """
    path = Path(out)
    if not path.name.endswith(".sigmf-meta") or path.name == ".sigmf-meta":
        raise ParameterError(f"annotate {path}: the name must end in .sigmf-meta", parameters=("annotate",))
    if capture.format not in ("sigmf", "raw"):
        raise ParameterError(
            f"annotate {path}: {capture.path} is a {capture.format} capture; annotations describe a SigMF recording "
            "or a raw data file", parameters=("annotate",))
    data = _data_file(capture)
    if path.resolve().parent != data.resolve().parent:
        raise ParameterError(
            f"annotate {path}: must be in the folder of the data file {data} (SigMF core:dataset names a file "
            "beside the metadata)", parameters=("annotate",))
    return path


def _own_document(capture: Capture) -> dict[str, Any]:
    if capture.format == "sigmf":
        doc = json.loads(Path(capture.path).read_text(encoding="utf-8"))
        return {"global": dict(doc.get("global", {})), "captures": [dict(c) for c in doc.get("captures", [])],
                "annotations": [dict(a) for a in doc.get("annotations", [])]}
    k = reference_factor(capture.reference_ppm)
    centre = capture.center_hz
    segment: dict[str, Any] = {"core:sample_start": 0}
    if centre is not None:
        segment["core:frequency"] = centre / k
    return {"global": {"core:datatype": capture.datatype, "core:sample_rate": capture.nominal_sample_rate_hz,
                       "core:version": SIGMF_VERSION,
                       "core:description": f"raw capture {capture.path.name}, described by {GENERATOR}"},
            "captures": [segment], "annotations": []}


def annotated_metadata(capture: Capture, out: str | os.PathLike[str], annotations: Sequence[Mapping[str, Any]]
                       ) -> dict[str, Any]:
    """The SigMF metadata document of ``capture``'s recording with ``annotations`` added.

    Parameters
    ----------
    capture : Capture
        A SigMF recording or a raw file (see :func:`check_annotation_path`).
    out : path
        Where the document will be written (decides ``core:dataset``).
    annotations : sequence of mapping
        SigMF annotation objects (``core:sample_start`` required); ``core:generator`` is added.
    """
    path = check_annotation_path(capture, out)
    doc = _own_document(capture)
    glob = doc["global"]
    data = _data_file(capture)
    if sigmf_paths(path)[1].resolve() != data.resolve():
        glob["core:dataset"] = data.name
        glob.pop("core:metadata_only", None)
    extensions = [dict(e) for e in glob.get("core:extensions", []) if e.get("name") != EXTENSION["name"]]
    glob["core:extensions"] = [*extensions, dict(EXTENSION)]
    glob["iqsift:reference_ppm"] = capture.reference_ppm
    added = [{**a, "core:generator": GENERATOR} for a in annotations]
    doc["annotations"] = sorted([*doc["annotations"], *added], key=lambda a: int(a["core:sample_start"]))
    return doc


def recording_edges(capture: Capture, lower_hz: float, upper_hz: float) -> dict[str, float]:
    """``core:freq_lower_edge``/``upper_edge`` for true frequencies, on the recording's own scale."""
    k = reference_factor(capture.reference_ppm)
    if lower_hz > upper_hz:
        raise ParameterError(f"annotation edges: lower {lower_hz!r} Hz above upper {upper_hz!r} Hz")
    return {"core:freq_lower_edge": float(lower_hz) / k, "core:freq_upper_edge": float(upper_hz) / k}

