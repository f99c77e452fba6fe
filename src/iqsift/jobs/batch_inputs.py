"""Naming and listing the captures of a batch: stems, shell patterns, manifest files."""

from __future__ import annotations

import glob
import os
import shlex
from pathlib import Path
from typing import Iterable

from ..errors import ParameterError

__all__ = ["SIGMF_SUFFIXES", "capture_stem", "expand_captures", "read_manifest"]

SIGMF_SUFFIXES = (".sigmf-meta", ".sigmf-data", ".sigmf")


def capture_stem(path: str | os.PathLike[str]) -> str:
    """The name of a capture's output folder: its file name without ``.sigmf-meta``/``.sigmf-data``/
    ``.sigmf`` or its last extension (``airfield.sigmf-meta`` -> ``airfield``, ``run1.cf32`` -> ``run1``)."""
    name = Path(path).name
    for suffix in SIGMF_SUFFIXES:
        if name.endswith(suffix) and len(name) > len(suffix):
            return name[: -len(suffix)]
    return Path(name).stem


def expand_captures(patterns: Iterable[str | os.PathLike[str]]) -> list[str]:
    """Capture paths from paths and shell-style globs, in the order given (each glob's matches sorted).

    A glob that matches nothing is refused; a plain path is kept as it is (a missing file fails its
    own capture, not the batch). A SigMF recording matched by both its files counts once, by its
    ``.sigmf-meta``.

    Raises
    ------
    ParameterError
        If a glob matches no file, or no capture is given at all.
    """
    found: list[str] = []
    for pattern in patterns:
        text = os.fspath(pattern)
        if not os.path.exists(text) and glob.has_magic(text):
            matches = sorted(glob.glob(text))
            if not matches:
                raise ParameterError(f"captures: {text!r} matches no file", parameters=("captures",))
            found += matches
        else:
            found.append(text)
    unique: dict[str, str] = {}
    for path in found:
        if path.endswith(".sigmf-data") and os.path.exists(path[: -len("-data")] + "-meta"):
            path = path[: -len("-data")] + "-meta"
        unique.setdefault(os.path.abspath(path), path)
    if not unique:
        raise ParameterError("captures: none given", parameters=("captures",))
    return list(unique.values())


def read_manifest(path: str | os.PathLike[str]) -> list[tuple[str, str | None]]:
    """The captures a manifest lists: one per line, optionally followed by that capture's plan.

    Blank lines and ``#`` comments are skipped; a path holding spaces is quoted as in a shell.
    Relative paths are relative to the manifest's folder, so a manifest travels with its captures.

    Raises
    ------
    ParameterError
        If a line holds more than a capture and a plan, or the manifest lists nothing.
    """
    manifest = Path(path)
    base = manifest.parent
    items: list[tuple[str, str | None]] = []
    try:
        text = manifest.read_text(encoding="utf-8")
    except UnicodeDecodeError as exc:
        raise ParameterError(f"manifest {manifest}: not a text file (byte {exc.start} is not UTF-8); "
                             "it lists one capture path per line", parameters=("manifest",)) from None
    for number, line in enumerate(text.splitlines(), start=1):
        try:
            fields = shlex.split(line, comments=True)
        except ValueError as exc:
            raise ParameterError(f"manifest {manifest}, line {number}: {exc}", parameters=("manifest",)) from None
        if not fields:
            continue
        if len(fields) > 2:
            raise ParameterError(f"manifest {manifest}, line {number}: got {len(fields)} fields; a line holds a "
                                 "capture and optionally its plan (quote paths holding spaces)",
                                 parameters=("manifest",))
        capture = str(base / fields[0])
        items.append((capture, str(base / fields[1]) if len(fields) == 2 else None))
    if not items:
        raise ParameterError(f"manifest {manifest}: lists no capture", parameters=("manifest",))
    return items
