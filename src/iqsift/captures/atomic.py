"""Atomic output files: write to a temporary file, rename into place when complete.

A command that fails halfway leaves no partial output and never clobbers an
existing file: every output is first written to a hidden temporary file in the
target folder (same file system, so :func:`os.replace` is atomic) and renamed
only when the whole job has succeeded. Existing files are refused unless
``force`` is given, and the check happens for all outputs before any work.
Folders the job creates are removed again (when empty) if it fails.

The steps that change what is on disk (reserving a temporary file, creating a
folder, the renames of a commit, the removals of an abort) run with SIGINT and
SIGTERM held back (:func:`signals_deferred`): a signal arriving meanwhile takes
effect when the step is complete, so a commit is never half done and an abort
never leaves half its files.
"""

from __future__ import annotations

import contextlib
import errno
import os
import signal
import tempfile
import threading
from pathlib import Path
from types import FrameType
from typing import IO, Any, Callable, Iterator

from ..errors import OutputExistsError, ParameterError

__all__ = ["OutputSet", "check_output_path", "signals_deferred", "write_atomically"]

_HELD_SIGNALS = (signal.SIGINT, signal.SIGTERM)


def _current_umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask


_UMASK = _current_umask()


@contextlib.contextmanager
def signals_deferred() -> Iterator[None]:
    """Hold SIGINT and SIGTERM back while the block runs; a signal that arrived meanwhile acts when it ends.

    While the block runs, both signals only get noted; afterwards the previous handlers are put
    back and each noted signal is raised again for them, so a ``KeyboardInterrupt`` (or whatever
    the handler does) comes after the block, never halfway through it. A handler already due when
    the block starts runs before it. Python-level handlers are swapped rather than the signals
    blocked with ``pthread_sigmask``: that blocks them in the calling thread only, and the worker
    threads numpy's BLAS starts would still take them.
    """
    if threading.current_thread() is not threading.main_thread():
        yield  # Python runs signal handlers in the main thread only: nothing can interrupt this one
        return
    noted: list[int] = []

    def note(signum: int, frame: FrameType | None) -> None:
        noted.append(signum)

    previous: dict[int, Any] = {}
    try:
        for held in _HELD_SIGNALS:
            previous[held] = signal.signal(held, note)  # runs any handler already due first
        yield
    finally:
        for number, handler in previous.items():
            _put_back(number, signal.SIG_DFL if handler is None else handler)
        for number in noted:
            signal.raise_signal(number)  # to the handler just put back (the first that raises ends this)


def _put_back(signum: int, handler: Any) -> None:
    """Restore a signal handler. ``signal.signal`` runs the handlers already due before it changes
    anything, and one restored a moment ago may raise: then restore this one anyway, and re-raise."""
    try:
        signal.signal(signum, handler)
    except BaseException:
        signal.signal(signum, handler)
        raise


def check_output_path(path: str | os.PathLike[str], force: bool = False, protect: tuple[Any, ...] = ()) -> Path:
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
        raise ParameterError(f"{path}: {why_not_a_folder(parent)}")
    if path.exists() and not force:
        raise OutputExistsError(f"{path}: exists; pass force to overwrite it", parameters=("force",))
    return path


def why_not_a_folder(folder: Path) -> str:
    """Why ``folder`` cannot hold a new file, in the user's words: missing, a file, or a link loop."""
    for level in (*reversed(folder.parents), folder):
        if str(level) in ("", "."):
            continue
        try:
            os.stat(level)
        except FileNotFoundError:
            return f"the folder {level} does not exist"
        except OSError as exc:
            if exc.errno == errno.ELOOP:
                return f"{level} is a symbolic link that leads round in a loop"
            return f"{level}: {exc.strerror}"
        if not level.is_dir():
            return f"{level} is a file, not a folder"
    return f"the folder {folder} does not exist"


class OutputSet:
    """A group of output files committed together.

    Use as a context manager: :meth:`reserve` each output (checks happen
    immediately), write to the temporary path it returns, and on a clean exit
    every temporary file is renamed into place. On an exception (an interrupt
    included) all temporary files are removed, nothing is renamed, and the
    folders made by :meth:`make_folder` are removed again when empty.

    Parameters
    ----------
    force : bool
        Overwrite existing files.
    protect : sequence of paths
        Inputs of the job (capture files, plan ...): refused as outputs even with ``force``.

    Examples
    --------
    >>> with OutputSet(force=False) as outputs:           # doctest: +SKIP
    ...     outputs.make_folder("out")
    ...     tmp = outputs.reserve("out/audio.wav")
    ...     write_audio(tmp)
    """

    def __init__(self, force: bool = False, protect: tuple[Any, ...] = ()) -> None:
        self.force = force
        self.protect = tuple(protect)
        self._pending: list[tuple[Path, Path]] = []
        self._committed: list[Path] = []
        self._made_folders: list[Path] = []
        self._after_commit: list[Callable[[], object]] = []

    def after_commit(self, action: Callable[[], object]) -> None:
        """Run ``action`` once the outputs are in place (not at all if they are discarded).

        For what concerns a finished output, such as a warning that names it: an interrupted
        job must not speak of a file it does not leave behind.
        """
        self._after_commit.append(action)

    def make_folder(self, path: str | os.PathLike[str], parents: bool = False) -> Path:
        """Create the folder ``path`` if it does not exist, and remember it for :meth:`abort`.

        Parameters
        ----------
        path : path
            The folder.
        parents : bool
            Also create missing parent folders (each remembered); otherwise the parent must exist.

        Raises
        ------
        ParameterError
            If ``path`` (or a parent) exists and is not a folder, or its parent does not exist
            and ``parents`` is false.
        """
        folder = Path(path)
        missing = []
        for level in (folder, *folder.parents):
            if level.is_dir():
                break
            if level.exists():
                raise ParameterError(f"{level}: exists and is not a folder")
            missing.append(level)
            if not parents:
                break
        if missing and not parents and not (folder.parent if str(folder.parent) else Path(".")).is_dir():
            raise ParameterError(f"{folder}: {why_not_a_folder(folder.parent)}")
        with signals_deferred():
            for level in reversed(missing):  # top down
                level.mkdir()
                self._made_folders.append(level)
        return folder

    def reserve(self, path: str | os.PathLike[str]) -> Path:
        """Check ``path`` and return a temporary path in the same folder to write to."""
        final = check_output_path(path, self.force, self.protect)
        if any(final.resolve() == f.resolve() for f, _ in self._pending):
            raise ParameterError(f"{final}: named twice as an output")
        with signals_deferred():  # the temporary file exists only once it is on the list abort() clears
            handle, tmp = tempfile.mkstemp(prefix=f".{final.stem}.", suffix=f".part{final.suffix}",
                                           dir=final.parent or ".")
            os.close(handle)
            temp = Path(tmp)
            self._pending.append((final, temp))
        return temp

    @property
    def paths(self) -> list[Path]:
        """Final paths reserved so far (or committed)."""
        return [f for f, _ in self._pending] or list(self._committed)

    def commit(self) -> list[Path]:
        """Rename every temporary file into place; returns the final paths.

        All or nothing: an output that appeared meanwhile (without ``force``) is refused before
        anything is renamed, and no signal takes effect between the first rename and the last.
        """
        try:
            with signals_deferred():
                for final, _ in self._pending:
                    if final.exists() and not self.force:
                        raise OutputExistsError(f"{final}: appeared while writing; pass force to overwrite it",
                                                parameters=("force",))
                done = []
                while self._pending:
                    final, temp = self._pending[0]
                    os.chmod(temp, 0o666 & ~_UMASK)  # mkstemp creates 0600; outputs get the usual permissions
                    os.replace(temp, final)
                    self._pending.pop(0)
                    done.append(final)
                self._committed = done
                self._made_folders = []  # they hold the outputs now
        except BaseException:
            self.abort()  # whatever was not renamed
            raise
        actions, self._after_commit = self._after_commit, []
        for action in actions:
            action()
        return done

    def abort(self) -> None:
        """Remove every temporary file, then the folders this set made if they are empty; nothing is renamed."""
        with signals_deferred():
            for _, temp in self._pending:
                with contextlib.suppress(FileNotFoundError):
                    temp.unlink()
            self._pending = []
            self._after_commit = []
            for folder in reversed(self._made_folders):  # deepest first
                with contextlib.suppress(OSError):  # not empty (someone else's file): keep it
                    folder.rmdir()
            self._made_folders = []

    def __enter__(self) -> "OutputSet":
        return self

    def __exit__(self, exc_type: type[BaseException] | None, exc: BaseException | None, tb: object) -> None:
        if exc_type is None:
            self.commit()
        else:
            self.abort()


def write_atomically(path: str | os.PathLike[str], write: Callable[[IO[Any]], object], *, binary: bool,
                     force: bool = False) -> Path:
    """Write one file through an :class:`OutputSet`: ``write`` gets the open temporary file (bytes or text).

    Nothing is left behind if ``write`` raises; an existing file is refused unless ``force``.
    """
    with OutputSet(force=force) as outputs:
        temp = outputs.reserve(path)
        handle: IO[Any]
        with (open(temp, "wb") if binary else open(temp, "w", encoding="utf-8", newline="")) as handle:
            write(handle)
    return Path(path)
