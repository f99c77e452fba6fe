"""Atomic output files: write to a temporary file, rename into place when complete.

A command that fails halfway leaves no partial output and never clobbers an
existing file: every output is first written to a hidden temporary file in the
target folder (same file system, so :func:`os.replace` is atomic) and renamed
only when the whole job has succeeded. Existing files are refused unless
``force`` is given, and the check happens for all outputs before any work.
"""

from __future__ import annotations

import os
import tempfile
from pathlib import Path

from ..errors import OutputExistsError, ParameterError

__all__ = ["OutputSet", "check_output_path", "write_atomically"]


def _current_umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask


_UMASK = _current_umask()


def check_output_path(path: str | os.PathLike, force: bool = False, protect: tuple = ()) -> Path:
    """Validate an output path before any work starts.

    Parameters
    ----------
    path : path
        The output.
    force : bool
        Allow overwriting an existing file.
    protect : sequence of paths
        The command's inputs: never overwritten, not even with ``force``.

    Raises
    ------
    OutputExistsError
        If the file exists and ``force`` is false.
    ParameterError
        If the path is a directory, its folder does not exist, or it is one of the inputs.
    """
    path = Path(path)
    if protect and path.exists():
        target = path.resolve()
        if any(target == Path(p).resolve() for p in protect):
            raise ParameterError(f"{path}: is an input of this command; refusing to overwrite it, even with force",
                                 parameters=("force",))
    if path.is_dir():
        raise ParameterError(f"{path}: is a directory; give a file name for the output")
    parent = path.parent if str(path.parent) else Path(".")
    if not parent.is_dir():
        raise ParameterError(f"{path}: the folder {parent} does not exist")
    if path.exists() and not force:
        raise OutputExistsError(f"{path}: exists; pass force to overwrite it", parameters=("force",))
    return path


class OutputSet:
    """A group of output files committed together.

    Use as a context manager: :meth:`reserve` each output (checks happen
    immediately), write to the temporary path it returns, and on a clean exit
    every temporary file is renamed into place. On an exception all temporary
    files are removed and nothing is renamed.

    Parameters
    ----------
    force : bool
        Overwrite existing files.
    protect : sequence of paths
        Inputs of the job (capture files, plan ...): refused as outputs even with ``force``.

    Examples
    --------
    >>> with OutputSet(force=False) as outputs:           # doctest: +SKIP
    ...     tmp = outputs.reserve("audio.wav")
    ...     write_audio(tmp)
    """

    def __init__(self, force: bool = False, protect: tuple = ()) -> None:
        self.force = force
        self.protect = tuple(protect)
        self._pending: list[tuple[Path, Path]] = []
        self._committed: list[Path] = []

    def reserve(self, path: str | os.PathLike) -> Path:
        """Check ``path`` and return a temporary path in the same folder to write to."""
        final = check_output_path(path, self.force, self.protect)
        if any(final.resolve() == f.resolve() for f, _ in self._pending):
            raise ParameterError(f"{final}: named twice as an output")
        handle, tmp = tempfile.mkstemp(prefix=f".{final.stem}.", suffix=f".part{final.suffix}", dir=final.parent or ".")
        os.close(handle)
        temp = Path(tmp)
        self._pending.append((final, temp))
        return temp

    @property
    def paths(self) -> list[Path]:
        """Final paths reserved so far (or committed)."""
        return [f for f, _ in self._pending] or list(self._committed)

    def commit(self) -> list[Path]:
        """Rename every temporary file into place; returns the final paths."""
        done = []
        for final, temp in self._pending:
            if final.exists() and not self.force:
                self.abort()
                raise OutputExistsError(f"{final}: appeared while writing; pass force to overwrite it",
                                        parameters=("force",))
            os.chmod(temp, 0o666 & ~_UMASK)  # mkstemp creates 0600; outputs get the usual permissions
            os.replace(temp, final)
            done.append(final)
        self._pending = []
        self._committed = done
        return done

    def abort(self) -> None:
        """Remove every temporary file; nothing is renamed."""
        for _, temp in self._pending:
            try:
                temp.unlink()
            except FileNotFoundError:
                pass
        self._pending = []

    def __enter__(self) -> "OutputSet":
        return self

    def __exit__(self, exc_type, exc, tb) -> None:
        if exc_type is None:
            self.commit()
        else:
            self.abort()


def write_atomically(path: str | os.PathLike, write, *, binary: bool, force: bool = False) -> Path:
    """Write one file through an :class:`OutputSet`: ``write`` gets the open temporary file (bytes or text).

    Nothing is left behind if ``write`` raises; an existing file is refused unless ``force``.
    """
    with OutputSet(force=force) as outputs:
        temp = outputs.reserve(path)
        mode = {"mode": "wb"} if binary else {"mode": "w", "encoding": "utf-8", "newline": ""}
        with open(temp, **mode) as handle:
            write(handle)
    return Path(path)
