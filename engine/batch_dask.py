"""A batch on a Dask distributed cluster (the optional ``cluster`` extra).

``dask.distributed`` is imported here only, when a scheduler address is given; the
rest of the engine runs without it.  The cluster's workers must have Shaftwatch
installed (the chunks are run by :func:`engine.batch_tasks.run_chunk`) and must see the
archive folder under the same absolute path as this machine (a shared file system):
they read run files and write results files there, while this process keeps the
writer lock and the value table, exactly as with the local pool.
"""

from __future__ import annotations

import time
from collections.abc import Iterable

from .batch_exec import IN_FLIGHT_PER_WORKER, POLL_S, Handle, Runner, Stop, drive
from .batch_tasks import Chunk, run_chunk
from .errors import InputError

#: How long to wait for the scheduler to answer, and for a first worker, s.
CONNECT_TIMEOUT_S = 20.0
#: How often the runner looks at the futures in flight, s.
CHECK_S = 0.01
INSTALL_HINT = ("a Dask scheduler needs the optional 'cluster' extra "
                "(pip install 'shaftwatch[cluster]', which installs dask[distributed])")


class DaskRunner(Runner):
    """Chunks run as tasks of a Dask cluster reached at ``address``."""

    def __init__(self, address: str):
        try:
            from distributed import Client
        except ImportError:
            raise InputError(f"scheduler {address}: {INSTALL_HINT}") from None
        try:
            self._client = Client(address, timeout=CONNECT_TIMEOUT_S, set_as_default=False)
        except (OSError, TimeoutError, ValueError) as exc:
            raise InputError(f"scheduler {address}: cannot connect ({exc})") from None
        try:
            self._client.wait_for_workers(1, timeout=CONNECT_TIMEOUT_S)
        except (OSError, TimeoutError) as exc:
            self._client.close()
            raise InputError(f"scheduler {address}: no worker joined within "
                             f"{CONNECT_TIMEOUT_S:g} s ({exc})") from None
        self.workers = max(1, int(sum(self._client.nthreads().values())))
        self.where = f"Dask cluster at {address} ({self.workers} worker threads)"

    def run(self, chunks: Iterable[Chunk], handle: Handle, stop: Stop) -> str:
        from distributed.client import FutureCancelledError
        from distributed.scheduler import KilledWorker

        def wait_first(futures):
            # distributed.wait would use the process's default client, which this
            # runner does not install; a future's status is a local attribute.
            end = time.monotonic() + POLL_S
            while True:
                done = [f for f in futures if f.done()]
                if done or time.monotonic() >= end:
                    return done
                time.sleep(CHECK_S)

        return drive(lambda c: self._client.submit(run_chunk, c, pure=False), wait_first,
                     chunks, handle, stop, IN_FLIGHT_PER_WORKER * self.workers,
                     (KilledWorker, FutureCancelledError, OSError))

    def close(self) -> None:
        self._client.close()
