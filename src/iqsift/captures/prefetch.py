"""Reading ahead on a thread: a block iterator run by a reader thread behind a bounded queue.

Reading, hashing (SHA-512 releases the GIL) and decoding a block overlap with the processing of
the previous one, so a second core does the file work. The blocks, their order and any exception
are exactly those of the plain iterator; memory holds at most ``depth`` blocks more than the plain
iterator does (the queue is bounded).
"""

from __future__ import annotations

import os
import queue
import threading
from typing import Iterator, TypeVar

__all__ = ["prefetched", "reader_thread_enabled"]

T = TypeVar("T")

_DONE = object()


def reader_thread_enabled() -> bool:
    """True unless ``IQSIFT_READER_THREAD=0`` is set (the read-ahead thread is then not started).

    The read-ahead only pays when the process may run on more than one CPU.
    """
    if os.environ.get("IQSIFT_READER_THREAD", "1").strip() == "0":
        return False
    try:
        return len(os.sched_getaffinity(0)) > 1
    except AttributeError:  # pragma: no cover - platforms without sched_getaffinity
        return (os.cpu_count() or 1) > 1


class _Failure:
    """An exception raised by the reader thread, handed to the consumer in order."""

    def __init__(self, exc: BaseException) -> None:
        self.exc = exc


def prefetched(source: Iterator[T], depth: int = 1) -> Iterator[T]:
    """Yield the items of ``source``, produced ahead by a reader thread (at most ``depth`` waiting).

    Parameters
    ----------
    source : iterator
        The plain iterator (e.g. a capture's block generator). It runs entirely on the reader
        thread, which also closes it.
    depth : int
        Items the reader may read ahead of the one the consumer holds (>= 1): with 1, the reader
        reads item k+1 while the consumer works on item k, so at most two items exist at a time.

    Notes
    -----
    An exception raised by ``source`` is raised here, after the items produced before it. When the
    consumer stops early (``close()``, an exception, an interrupt) the reader is told to stop and
    is joined (it finishes the item it is reading first). Producer/consumer with a bounded buffer
    (common practice; Python's :class:`queue.Queue`).
    """
    q: queue.Queue[object] = queue.Queue()
    slots = threading.Semaphore(max(1, int(depth)))  # items read but not yet taken by the consumer
    stop = threading.Event()

    def wait_for_slot() -> bool:
        while not stop.is_set():
            if slots.acquire(timeout=0.05):
                return not stop.is_set()
        return False

    def run() -> None:
        try:
            while wait_for_slot():
                try:
                    item = next(source)
                except StopIteration:
                    q.put(_DONE)
                    return
                q.put(item)
        except BaseException as exc:  # handed over to the consumer, raised there
            q.put(_Failure(exc))
        finally:
            close = getattr(source, "close", None)
            if close is not None:
                close()

    reader = threading.Thread(target=run, name="iqsift-reader", daemon=True)
    reader.start()
    try:
        while True:
            item = q.get()
            if item is _DONE:
                return
            if isinstance(item, _Failure):
                raise item.exc
            slots.release()  # the consumer is done with the previous item: read the next one meanwhile
            yield item  # type: ignore[misc]
    finally:
        stop.set()
        reader.join()
