"""Where a batch runs: this process, local worker processes, or a Dask cluster.

An engine takes a function and an iterable of tasks, runs the function on each
task and hands every result to a callback as soon as it is finished (in the
order they finish; the caller puts them in order). Scheduling is left to the
standard library's process pool or to Dask's distributed scheduler; the engine
only keeps a bounded number of tasks in flight so that a large job does not
hold every partition in memory at once.
"""

from __future__ import annotations

import os

from .errors import DrainplanError, InputError

__all__ = ["make_engine", "InProcess", "LocalProcesses", "DaskCluster"]

#: How long to wait for a Dask scheduler to answer.
CONNECT_TIMEOUT = "10s"


class InProcess:
    """Run every task here, one after the other (``--workers 1``)."""

    name = "1 process"

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        return False

    def run(self, fn, tasks, on_result, total=None):
        for t in tasks:
            on_result(fn(t))


class LocalProcesses:
    """Worker processes on this machine (``concurrent.futures.ProcessPoolExecutor``)."""

    def __init__(self, workers):
        self.workers = workers
        self.name = f"{workers} local worker processes"
        self._pool = None

    def __enter__(self):
        from concurrent.futures import ProcessPoolExecutor

        self._pool = ProcessPoolExecutor(max_workers=self.workers)
        return self

    def __exit__(self, exc_type, *exc):
        # on an interruption, drop queued tasks instead of finishing them
        self._pool.shutdown(wait=exc_type is None, cancel_futures=exc_type is not None)
        return False

    def run(self, fn, tasks, on_result, total=None):
        from concurrent.futures import FIRST_COMPLETED, wait

        window = 2 * self.workers
        pending = set()
        it = iter(tasks)
        exhausted = False
        while True:
            while not exhausted and len(pending) < window:
                try:
                    pending.add(self._pool.submit(fn, next(it)))
                except StopIteration:
                    exhausted = True
            if not pending:
                return
            finished, pending = wait(pending, return_when=FIRST_COMPLETED)
            for f in sorted(finished, key=id):
                on_result(f.result())


class DaskCluster:
    """An existing Dask distributed cluster (``--scheduler tcp://host:8786``).

    Tasks go to the cluster through ``Client.submit`` and come back through
    ``distributed.as_completed``; Dask places them on workers, moves work between
    them and retries a task whose worker died.
    """

    def __init__(self, address):
        try:
            import distributed  # noqa: F401
        except ImportError:
            raise InputError("--scheduler needs Dask: pip install 'drainplan[dask]'",
                             param="scheduler") from None
        self.address = address
        self.name = f"Dask cluster at {address}"
        self._client = None

    def __enter__(self):
        from distributed import Client

        try:
            self._client = Client(self.address, timeout=CONNECT_TIMEOUT, set_as_default=False)
        except (OSError, TimeoutError) as exc:
            raise InputError(f"cannot reach the Dask scheduler at {self.address}: "
                             f"{' '.join(str(exc).split())[:160]}", param="scheduler") from None
        return self

    def __exit__(self, *exc):
        self._client.close()
        return False

    def run(self, fn, tasks, on_result, total=None):
        from distributed import as_completed

        nthreads = sum(self._client.nthreads().values()) or 1
        window = 2 * nthreads
        it = iter(tasks)
        futures = []
        for t in it:
            futures.append(self._client.submit(fn, t, pure=False))
            if len(futures) >= window:
                break
        if not futures:
            return
        ac = as_completed(futures, loop=self._client.loop)
        for fut in ac:
            try:
                result = fut.result()
            except Exception as exc:      # a task that failed on the cluster
                if isinstance(exc, DrainplanError):
                    raise
                raise DrainplanError(f"a batch partition failed on the cluster: "
                                     f"{type(exc).__name__}: {exc}") from None
            fut.release()
            on_result(result)
            nxt = next(it, None)
            if nxt is not None:
                ac.add(self._client.submit(fn, nxt, pure=False))


def available_cores():
    """Cores this process may run on (its CPU affinity where the system tells it)."""
    try:
        return len(os.sched_getaffinity(0)) or 1
    except (AttributeError, OSError):
        return os.cpu_count() or 1


def make_engine(*, workers=None, scheduler=None):
    """The engine for ``--workers`` / ``--scheduler`` (workers default: the core count)."""
    if scheduler:
        return DaskCluster(scheduler)
    if workers is None:
        workers = available_cores()
    if workers < 1:
        raise InputError("--workers must be 1 or more", param="workers")
    return InProcess() if workers == 1 else LocalProcesses(workers)
