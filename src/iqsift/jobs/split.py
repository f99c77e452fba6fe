"""One long capture cut into time pieces run in parallel on Dask, joined sample for sample (``batch --split-seconds``).

Piece ``k`` covers input samples ``[k·L, (k+1)·L)`` of the capture, ``L`` a whole number of the shared
filter bank's hops (so also of every channel's decimation). The bank runs on an absolute frame grid:
a piece's front-end task starts the bank ``history`` samples early (the samples before the piece, or
zeros before the capture's start, exactly as a whole pass holds them;
:meth:`~iqsift.dsp.channelizer.FastConvChannelizer.start_at`), so the pieces' channel basebands joined
equal a whole pass's. Each unit of back ends (a channel, or a batch of identical envelope chains,
:attr:`~iqsift.extractor.Extractor.units`) then runs as a chain of tasks over the pieces in order, its
state (fine mixer, detector, normaliser, AGC, resampler, squelch, analyzer) handed from task to task;
units run in parallel with each other. The back end is fed the baseband cut where a whole pass's
reading blocks cut it, so every stage sees the very calls it sees in ``iqsift extract``: the audio
and the report equal a whole pass's. Audio goes to hidden files beside the batch folder (shared
storage, as for the whole batch), never through the scheduler; a last task writes the capture's
folder exactly as :func:`~iqsift.jobs.extract_file` does.

Dask is not imported here: :func:`submit_capture` is handed the client.
"""

from __future__ import annotations

import copy
import math
import os
import time
import uuid
import warnings
from dataclasses import dataclass, field, replace
from datetime import datetime, timezone
from pathlib import Path
from typing import TYPE_CHECKING, Any, Callable, Mapping

import numpy as np

from ..captures import DEFAULT_BLOCK_SIZE, AudioWriter, OutputSet
from ..errors import CaptureError, IqsiftWarning, ParameterError
from ..extractor import Extractor
from ..jsonable import dumps
from ..plan import load_plan
from .common import CaptureSummary, SelectionSummary, audio_file_rate, nonfinite_policy, opened
from .extract import ChannelResult, ExtractResult

if TYPE_CHECKING:
    from distributed import Client, Future

__all__ = ["PieceBaseband", "check_split", "SplitJob", "UnitState", "back_step", "front_piece", "plan_split", "submit_capture"]

SPLIT_UNSUPPORTED = ("spectra", "baseband", "html", "iq_correct")
"""Extract options a split capture cannot give yet (their accumulators and writers see the whole stream;
``html`` draws the stage spectra; ``iq_correct``'s first-pass estimate is not yet handed to the pieces)."""


@dataclass(frozen=True)
class SplitJob:
    """How one capture is cut (plain data, pickled to the workers).

    ``count`` samples of the capture from ``start``; pieces of ``piece_samples`` (a multiple of the bank's
    ``hop``); ``units`` the back-end units (channel indices); ``work`` the hidden folder of the audio
    pieces; ``block_size`` the reading block of a whole pass, whose cuts the back ends see.
    """

    capture: str
    plan: str
    options: Mapping[str, Any]
    start: int
    count: int
    hop: int
    piece_samples: int
    units: tuple[tuple[int, ...], ...]
    work: str
    checksum: bool
    block_size: int = DEFAULT_BLOCK_SIZE

    @property
    def pieces(self) -> int:
        return max(1, -(-self.count // self.piece_samples))

    def piece_range(self, k: int) -> tuple[int, int]:
        """Input samples ``[first, stop)`` of piece ``k`` (from the selection's start)."""
        return k * self.piece_samples, min(self.count, (k + 1) * self.piece_samples)

    def block_ends(self) -> list[int]:
        """Where a whole pass's reading blocks end (input samples from the selection's start)."""
        return [min(self.count, j * self.block_size) for j in range(1, -(-self.count // self.block_size) + 1)]


@dataclass
class PieceBaseband:
    """The bank's outputs for one piece: per channel (``outs``), and after the last piece the outputs for
    the end padding (``tails``) and the bank's flush (``flushed``)."""

    index: int
    outs: list[np.ndarray]
    tails: list[np.ndarray] | None = None
    flushed: list[np.ndarray] | None = None


@dataclass
class UnitState:
    """A unit's back ends between pieces: the extractor holding them, the bank outputs received but not
    yet fed (``pending``, less than one reading block), the next block, the audio written so far
    (samples per channel) and the warnings raised."""

    unit: tuple[int, ...]
    extractor: Extractor
    pending: dict[int, np.ndarray]
    next_block: int = 0
    written: dict[int, int] = field(default_factory=dict)
    said: list[str] = field(default_factory=list)


def _open(job: SplitJob) -> Any:
    get = job.options.get
    return opened(job.capture, format=get("format"), rate=get("rate"), center=get("center"), ppm=get("ppm"),
                  strict=bool(get("strict")), verify=False)


def _extractor(job: SplitJob, cap: Any) -> Extractor:
    selection = cap.select(None, None)
    return Extractor.from_plan(cap, load_plan(job.plan), selection=selection)


def check_split(split_seconds: float, options: Mapping[str, Any]) -> None:
    """Refuse a bad ``split_seconds`` or options a split capture cannot give (:data:`SPLIT_UNSUPPORTED`).

    Raises
    ------
    ParameterError
        Naming ``split_seconds`` (and the conflicting option).
    """
    if not (split_seconds > 0 and math.isfinite(split_seconds)):
        raise ParameterError(f"split_seconds: got {split_seconds!r}; a positive number of seconds",
                             parameters=("split_seconds",))
    refused = [name for name in SPLIT_UNSUPPORTED if options.get(name)]
    if refused:
        raise ParameterError(f"split_seconds: cannot be combined with {', '.join(refused)} yet",
                             parameters=("split_seconds", *refused))


def plan_split(capture: str, plan: str, options: Mapping[str, Any], split_seconds: float, work: str) -> SplitJob:
    """Cut ``capture`` into pieces of about ``split_seconds`` (rounded to the nearest whole number of the
    bank's hops, at least one), with the plan's channels designed (and so checked) here.

    Raises
    ------
    ParameterError
        For options a split capture cannot give (:data:`SPLIT_UNSUPPORTED`), or a bad ``split_seconds``.
    """
    check_split(split_seconds, options)
    job_options = {k: options.get(k) for k in ("format", "rate", "center", "strict", "allow_nonfinite")}
    # the receiver's reference error: given, or the plan's [defaults] (as a whole extract takes it)
    job_options["ppm"] = options.get("ppm") if options.get("ppm") is not None else load_plan(plan).ppm
    probe = SplitJob(capture, plan, job_options, 0, 0, 1, 1, (), work, False)
    with _open(probe) as cap:
        selection = cap.select(None, None)
        extractor = _extractor(probe, cap)
        isb = [rx.channel.name for rx in extractor.receivers if rx.channel.mode == "isb"]
        if isb:  # their per-sideband measurements are not carried across pieces yet
            raise ParameterError(f"split_seconds: cannot be combined with independent-sideband channels yet "
                                 f"({', '.join(isb)}); extract such a plan whole", parameters=("split_seconds",))
        hop = extractor.bank.hop
        piece = max(1, int(round(split_seconds * cap.sample_rate_hz / hop))) * hop
        checksum = bool(cap.metadata.get("core:sha512"))
        return SplitJob(capture, plan, job_options, selection.start, selection.count, hop, piece,
                        tuple(extractor.units), work, checksum)


_FRONT: dict[tuple[Any, ...], Extractor] = {}
"""The front end of the job a worker last ran a piece of (designing the bank once per worker and job)."""


def front_piece(job: SplitJob, k: int) -> PieceBaseband:
    """The bank's outputs of every channel for piece ``k`` (the task a worker runs), read with pre-roll."""
    with _open(job) as cap:
        made = (job.capture, job.plan, tuple(sorted(job.options.items())), job.count)
        if made not in _FRONT:
            _FRONT.clear()
            _FRONT[made] = _extractor(job, cap)
        extractor = _FRONT[made]
        bank = extractor.bank
        first, stop = job.piece_range(k)
        nonfinite = nonfinite_policy(bool(job.options.get("allow_nonfinite")))
        bank.reset()
        if first > 0:
            lead = min(first, bank.history)
            held = np.zeros(bank.history, np.complex64)
            held[bank.history - lead:] = cap.read(job.start + first - lead, lead, nonfinite=nonfinite)
            bank.start_at(first, held)
        parts: list[list[np.ndarray]] = [[] for _ in extractor.receivers]
        for block in cap.blocks(start=job.start + first, count=stop - first, nonfinite=nonfinite):
            for part, out in zip(parts, bank.process(block)):
                part.append(out)
        piece = PieceBaseband(k, [np.concatenate(p) if p else np.zeros(0, np.complex64) for p in parts])
        if k == job.pieces - 1:
            piece.tails = bank.process(np.zeros(extractor.flush_padding, np.complex64))
            piece.flushed = bank.flush()
        bank.reset()
        return piece


def start_unit(job: SplitJob, unit: tuple[int, ...]) -> UnitState:
    """A unit's back ends before the first piece (designed as a whole pass designs them)."""
    with _open(job) as cap:
        extractor = _extractor(job, cap)
    return UnitState(unit, extractor, {i: np.zeros(0, np.complex64) for i in unit},
                     written={i: 0 for i in unit})


def _audio_path(job: SplitJob, channel: int) -> Path:
    return Path(job.work) / f"channel-{channel}.f32"


def _write_audio(job: SplitJob, state: UnitState, audio: list[np.ndarray]) -> None:
    """Append the unit's new audio to its files, from where the state says they end (a retried task
    rewrites, never duplicates)."""
    for i in state.unit:
        path = _audio_path(job, i)
        with open(path, "ab") as handle:
            handle.truncate(state.written[i] * 4)
            handle.write(np.asarray(audio[i], np.float32).tobytes())
        state.written[i] += audio[i].size


def back_step(job: SplitJob, state: UnitState, piece: PieceBaseband) -> UnitState:
    """Run a unit's back ends over piece ``piece.index`` (the task a worker runs; pieces in order).

    The bank outputs are cut where a whole pass's reading blocks end (after ``n`` input samples the
    bank has given ``floor(n / hop)·hop / D`` outputs of a channel decimating by ``D``), each block
    fed with its input count, so every stage sees exactly a whole pass's calls.
    """
    state = copy.deepcopy(state)  # the task's input stays as it was: a retry starts from it again
    extractor = state.extractor
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        for i in state.unit:
            state.pending[i] = np.concatenate([state.pending[i], piece.outs[i]])
        received = min(job.piece_range(piece.index)[1] // job.hop * job.hop, job.count)
        ends = job.block_ends()
        previous = 0 if state.next_block == 0 else ends[state.next_block - 1]
        while state.next_block < len(ends) and ends[state.next_block] // job.hop * job.hop <= received:
            end = ends[state.next_block]
            outs: list[np.ndarray] = [np.zeros(0, np.complex64)] * len(extractor.receivers)
            for i in state.unit:
                decimation = extractor.bank.channels[i].decimation
                take = (end // job.hop - previous // job.hop) * job.hop // decimation
                outs[i], state.pending[i] = state.pending[i][:take], state.pending[i][take:]
            _write_audio(job, state, extractor.process_channels(outs, end - previous, [state.unit]))
            previous = end
            state.next_block += 1
        if piece.tails is not None and piece.flushed is not None:
            _write_audio(job, state, extractor.finish_channels(piece.tails, piece.flushed, [state.unit]))
    state.said += [str(w.message) for w in caught]
    return state


def verify_capture(job: SplitJob) -> None:
    """Check the capture's data against its recorded checksum (one pass, as a whole extract checks it)."""
    if not job.checksum:
        return
    get = job.options.get
    with opened(job.capture, format=get("format"), rate=get("rate"), center=get("center"), ppm=get("ppm"),
                strict=bool(get("strict")), verify=True) as cap:
        for _ in cap.blocks(nonfinite="keep"):
            pass


def write_outputs(job: SplitJob, states: list[UnitState], folder: Path, started_wall: float) -> ExtractResult:
    """Write the capture's folder (audio, ``report.json``) as :func:`~iqsift.jobs.extract_file` does."""
    by_channel = {i: s for s in states for i in s.unit}
    for state in states:
        for text in state.said:
            warnings.warn(text, IqsiftWarning)
    with _open(job) as cap:
        selection = cap.select(None, None)
        with OutputSet(force=False, protect=(*cap.files, Path(job.plan))) as outputs:
            outputs.make_folder(folder)
            channels = []
            for i in range(len(by_channel)):
                rx = by_channel[i].extractor.receivers[i]
                path = folder / f"{rx.channel.extra.get('file_stem') or rx.channel.name}.wav"
                writer = AudioWriter(path, audio_file_rate(rx.audio_rate_hz), channels=rx.audio_channels,
                                     outputs=outputs)
                with open(_audio_path(job, i), "rb") as handle:
                    left = by_channel[i].written[i]  # float32 values: samples × audio channels
                    while left > 0:
                        chunk = np.frombuffer(handle.read(min(left, 1 << 20) * 4), np.float32)
                        if chunk.size == 0:  # the spool lost samples (storage): refuse, never loop forever
                            raise CaptureError(f"{_audio_path(job, i)}: {left} audio samples missing from the "
                                               "pieces' spool file")
                        writer.write(chunk if rx.audio_channels == 1 else chunk.reshape(-1, rx.audio_channels))
                        left -= chunk.size
                writer.close()
                entry = {"audio": str(path), "audio_clipped_samples": writer.clipped_samples}
                channels.append(ChannelResult(rx.report(), entry))
            lead = by_channel[0].extractor
            result = ExtractResult(
                capture=CaptureSummary.of(cap), plan=job.plan, selection=SelectionSummary.of(cap, selection),
                filter_bank={"fft_size": lead.bank.fft_size, "hop": lead.bank.hop, "channels": len(channels)},
                processing_s=time.time() - started_wall, channels=tuple(channels), folder=str(folder),
                elapsed_s=time.time() - started_wall)
            outputs.reserve(folder / "report.json").write_text(dumps(result.to_dict()))
    return result


def run_split(run: Callable[..., Any], task: Any, job: SplitJob, started_wall: float, _verified: None,
              *states: UnitState) -> Any:
    """The capture's last task: its folder written through ``run`` (the batch's staging and commit), the
    outcome timed from the capture's submission."""
    try:
        outcome = run(task, produce=lambda staging: write_outputs(job, list(states), staging, started_wall))
        # the capture's time is that of all its tasks, from submission; not only of this last one
        started = datetime.fromtimestamp(started_wall, timezone.utc).strftime("%Y-%m-%dT%H:%M:%S.%fZ")
        return replace(outcome, timings={**outcome.timings, "started_utc": started,
                                         "elapsed_s": time.time() - started_wall})
    finally:
        import shutil

        shutil.rmtree(job.work, ignore_errors=True)


def submit_capture(client: "Client", run: Callable[..., Any], task: Any, split_seconds: float, retries: int,
                   tag: str) -> tuple["Future", list["Future"], SplitJob]:
    """Submit one capture cut in pieces: returns the future of its outcome (``run``'s), the futures of its
    pieces' front ends (for progress only: drop them once done) and the job.

    ``run(task, produce=...)`` is the batch's :func:`~iqsift.jobs.batch.run_capture`; ``task`` its
    ``CaptureTask``. The client keeps no future of a piece's baseband or a unit's intermediate state:
    each is released by the scheduler once its one consumer has run.

    Raises
    ------
    IqsiftError
        When the capture or plan cannot be read or the channels designed (before any task).
    """
    work = os.path.join(task.folder, f".{task.stem}.batch-partial-{uuid.uuid4().hex[:12]}-pieces")
    job = plan_split(task.capture, task.plan, task.options, split_seconds, work)
    os.makedirs(work)
    started_wall = time.time()

    def key(name: str) -> str:
        return f"iqsift-{name}-{task.stem}-{tag}"

    verified = client.submit(verify_capture, job, retries=retries, pure=False, key=key("verify"))
    states = [client.submit(start_unit, job, unit, retries=retries, pure=False, key=key(f"start-u{u}"))
              for u, unit in enumerate(job.units)]
    fronts = []
    for k in range(job.pieces):
        front = client.submit(front_piece, job, k, retries=retries, pure=False, key=key(f"front-p{k}"))
        fronts.append(front)
        states = [client.submit(back_step, job, state, front, retries=retries, pure=False,
                                key=key(f"back-u{u}-p{k}")) for u, state in enumerate(states)]
    outcome = client.submit(run_split, run, task, job, started_wall, verified, *states, retries=retries,
                            pure=False, key=key("write"))
    return outcome, fronts, job
