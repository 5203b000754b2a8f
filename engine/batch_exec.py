"""Where a batch's chunks run: in the parent process, in a local process pool, or on a
Dask cluster (:mod:`engine.batch_dask`).

Every runner hands chunks (:class:`engine.batch_tasks.Chunk`) to
:func:`engine.batch_tasks.run_chunk` and passes each chunk's outcomes to the parent's
``handle`` callback as they arrive.  A pool keeps at most ``IN_FLIGHT_PER_WORKER`` chunks
per worker handed out, so that a cancel request (checked every ``POLL_S``) stops the
hand-out quickly; the chunks already handed out finish and are handled.

The pool uses processes, not threads (h5py holds one global lock), never started by
a plain ``fork``, which would copy the parent's open HDF5 files, lock state and threads
into the children.  Where the platform has it (Linux), a fork server started with the
engine already imported (:data:`PRELOAD`) forks the workers: a clean process that
holds no archive, so each worker starts in milliseconds instead of importing numpy,
scipy and the engine again (about 1.5 s of CPU each; on the 2-core benchmark this took
the 2-worker speed-up from 1.56–1.68 to 1.72 and above).  Elsewhere ``spawn``.
Workers ignore Ctrl-C (:func:`engine.batch_tasks.ignore_interrupt`): the parent
alone decides to stop.
"""

from __future__ import annotations

import multiprocessing
from abc import ABC, abstractmethod
from collections.abc import Callable, Iterable
from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait
from concurrent.futures.process import BrokenProcessPool

from .batch_tasks import Chunk, Outcome, ignore_interrupt, run_chunk

#: Chunks handed out per worker at a time (one running, one waiting).
IN_FLIGHT_PER_WORKER = 2
#: How often a runner looks at the cancel request while runs are in flight, s.
POLL_S = 0.2

Handle = Callable[[list[Outcome]], None]
Stop = Callable[[], bool]


#: How the pool's processes are started (see the module notes).
START_METHOD = "forkserver" if "forkserver" in multiprocessing.get_all_start_methods() \
    else "spawn"
#: Modules the fork server imports once, so that each worker forked from it starts
#: with the engine loaded instead of importing it again (about 1.5 s of CPU each).
PRELOAD = ("engine.batch_tasks",)


def pool_context():
    """The multiprocessing context of the pool (see the module notes)."""
    ctx = multiprocessing.get_context(START_METHOD)
    if START_METHOD == "forkserver":
        ctx.set_forkserver_preload(list(PRELOAD))
    return ctx


def failed_outcomes(chunk: Chunk, reason: str) -> list[Outcome]:
    """Every run of a chunk that did not come back, as failed."""
    return [Outcome(it.run_id, it.point, "failed",
                    path=it.run_file if chunk.kind == "analyse" else it.results_file,
                    reason=f"{it.run_file if chunk.kind == 'analyse' else it.results_file}:"
                           f" {reason}") for it in chunk.items]


class Runner(ABC):
    """Runs chunks for a batch (see the module notes)."""

    workers: int = 1
    where: str = "this process"

    @abstractmethod
    def run(self, chunks: Iterable[Chunk], handle: Handle, stop: Stop) -> str:
        """Run every chunk, passing each one's outcomes to ``handle``.

        Returns ``""`` when every chunk was handed out and handled, ``"cancelled"``
        when ``stop()`` turned true first, or the reason why the runner could not go
        on (a broken pool, a lost cluster).
        """

    @abstractmethod
    def close(self) -> None:
        """Release the workers (the runs handed out are finished first)."""


class InlineRunner(Runner):
    """Every chunk in the calling process, one after the other."""

    def run(self, chunks: Iterable[Chunk], handle: Handle, stop: Stop) -> str:
        for chunk in chunks:
            if stop():
                return "cancelled"
            handle(run_chunk(chunk))
        return ""

    def close(self) -> None:
        """Nothing to release: the work ran in this process."""


def drive(submit: Callable, wait_first: Callable, chunks: Iterable[Chunk], handle: Handle,
          stop: Stop, limit: int, lost: tuple[type[BaseException], ...]) -> str:
    """Hand chunks out through ``submit`` (keeping at most ``limit`` in flight) and
    handle their outcomes as ``wait_first`` reports them done.

    ``lost`` are the exceptions meaning that the workers are gone: the chunks in
    flight are reported failed and nothing more is handed out.
    """
    pending = iter(chunks)
    inflight: dict = {}
    status, exhausted = "", False
    while True:
        while not status and not exhausted and len(inflight) < limit:
            if stop():
                status = "cancelled"
                break
            chunk = next(pending, None)
            if chunk is None:
                exhausted = True
                break
            try:
                inflight[submit(chunk)] = chunk
            except lost as exc:
                handle(failed_outcomes(chunk, f"not analysed, the workers are gone ({exc})"))
                status = f"the workers stopped: {exc}"
        if not inflight:
            return status
        for fut in wait_first(list(inflight)):
            chunk = inflight.pop(fut)
            try:
                outcomes = fut.result()
            except lost as exc:
                outcomes = failed_outcomes(chunk, f"the worker stopped ({exc or type(exc).__name__})")
                status = status or f"the workers stopped: {exc or type(exc).__name__}"
            except Exception as exc:  # noqa: BLE001 - a chunk that could not be run
                outcomes = failed_outcomes(chunk, f"{type(exc).__name__}: {exc}")
            handle(outcomes)
        if not status and stop():
            status = "cancelled"


class PoolRunner(Runner):
    """A local process pool of ``workers`` processes."""

    def __init__(self, workers: int):
        self.workers = int(workers)
        self.where = f"process pool ({self.workers} processes)"
        ctx = pool_context()
        self._pool = ProcessPoolExecutor(max_workers=self.workers, mp_context=ctx,
                                         initializer=ignore_interrupt)

    def run(self, chunks: Iterable[Chunk], handle: Handle, stop: Stop) -> str:
        return drive(lambda c: self._pool.submit(run_chunk, c),
                     lambda fs: wait(fs, timeout=POLL_S, return_when=FIRST_COMPLETED).done,
                     chunks, handle, stop, IN_FLIGHT_PER_WORKER * self.workers,
                     (BrokenProcessPool,))

    def close(self) -> None:
        self._pool.shutdown(wait=True, cancel_futures=True)


class Runners:
    """The runners of one batch: the parent itself, a local pool of ``workers``
    processes (started when first needed, then kept for the batch's later stages) or
    the Dask cluster at ``scheduler`` (connected at once, so that a wrong address
    stops the batch before it changes anything)."""

    def __init__(self, workers: int, scheduler: str | None):
        self.workers = workers
        self.inline = InlineRunner()
        self.pool: Runner | None = None
        self.cluster: Runner | None = None
        if scheduler:
            from .batch_dask import DaskRunner

            self.cluster = DaskRunner(str(scheduler))

    def choose(self, runs: int, minimum: int) -> Runner:
        """The cluster when there is one, else the pool when there are ``minimum``
        runs or more and more than one worker, else the parent."""
        if self.cluster is not None and runs:
            return self.cluster
        if self.workers > 1 and runs >= minimum:
            if self.pool is None:
                self.pool = PoolRunner(self.workers)
            return self.pool
        return self.inline

    def close(self) -> None:
        for r in (self.pool, self.cluster):
            if r is not None:
                r.close()
