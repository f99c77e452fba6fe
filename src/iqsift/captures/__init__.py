"""Capture files: readers (SigMF, raw interleaved, WAV/FLAC), writers, and statistics."""

from .annotate import annotated_metadata, check_annotation_path, recording_edges
from .atomic import OutputSet, check_output_path, signals_deferred
from .audio import AudioWriter, read_audio
from .capture import DEFAULT_BLOCK_SIZE, Annotation, Capture, SampleRange, Segment
from .datatypes import ALL_DATATYPES, DataType, parse_datatype
from .integrity import ChecksumError
from .open import capture_kind, input_files, open_capture
from .sigmf import SIGMF_VERSION, SigMFWriter, sigmf_paths
from .stats import CaptureStats, StatsAccumulator

__all__ = [
    "ALL_DATATYPES",
    "Annotation",
    "AudioWriter",
    "Capture",
    "CaptureStats",
    "ChecksumError",
    "DEFAULT_BLOCK_SIZE",
    "DataType",
    "OutputSet",
    "SIGMF_VERSION",
    "SampleRange",
    "Segment",
    "SigMFWriter",
    "StatsAccumulator",
    "annotated_metadata",
    "capture_kind",
    "check_annotation_path",
    "recording_edges",
    "input_files",
    "check_output_path",
    "open_capture",
    "read_audio",
    "parse_datatype",
    "sigmf_paths",
    "signals_deferred",
]
