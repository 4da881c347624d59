"""Where batch work units run: in process, in a process pool, or on a dask cluster.

Every executor takes picklable :class:`~sim.batch.WorkUnit` objects and yields
``(unit, rows, error)`` as units finish (in any order); ``error`` is the exception of a unit
that raised (then ``rows`` is None). The parent alone writes results.
"""

from __future__ import annotations

import multiprocessing
import sys
import threading
from collections.abc import Callable, Iterator, Sequence
from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait

from planners.errors import SkidpadError

EXECUTORS = ("serial", "processes", "dask")

Outcome = tuple[object, "list[dict] | None", "BaseException | None"]


def single_threaded() -> None:
    """Worker initialiser: one numba thread per process, so a pool of J processes does not
    start J x cores threads."""
    import numba

    numba.set_num_threads(1)


def run_serial(units: Sequence, work: Callable) -> Iterator[Outcome]:
    """Run units one after another in this process."""
    for u in units:
        try:
            rows = work(u)
        except Exception as exc:  # a failing unit is recorded, the batch goes on
            yield u, None, exc
        else:
            yield u, rows, None


def start_method() -> str:
    """How worker processes start: ``fork`` where it is safe, else forkserver or spawn.

    A forked worker starts with this process's imports and loaded kernels (about a second
    and a half saved per worker). It is safe on Linux while this process runs one thread and
    numba's thread pool has not started (a fork copies no thread, so a pool or a lock held by
    another thread would be broken in the child).
    """
    from numba.np.ufunc import parallel

    methods = multiprocessing.get_all_start_methods()
    if (
        sys.platform == "linux" and "fork" in methods and threading.active_count() == 1
        and not getattr(parallel, "_is_initialized", True)
    ):
        return "fork"
    return "forkserver" if "forkserver" in methods else "spawn"


def make_pool(jobs: int) -> ProcessPoolExecutor:
    """A pool of ``jobs`` single-threaded workers, started now (see :func:`start_method`).

    Start it before any other thread (a progress display) so that the workers can be forked.
    """
    pool = ProcessPoolExecutor(
        max_workers=jobs, mp_context=multiprocessing.get_context(start_method()), initializer=single_threaded
    )
    pool.submit(int).result()  # launches the workers (all of them at once when forked)
    return pool


def run_processes(units: Sequence, work: Callable, *, jobs: int, pool: ProcessPoolExecutor | None = None) -> Iterator[Outcome]:
    """Run units on ``jobs`` worker processes (``pool`` when given: the caller shuts it down)."""
    own = pool is None
    if own:
        pool = make_pool(jobs)
    try:
        pending = {pool.submit(work, u): u for u in units}
        while pending:
            done, _ = wait(pending, return_when=FIRST_COMPLETED)
            for fut in done:
                u = pending.pop(fut)
                exc = fut.exception()
                yield (u, None, exc) if exc is not None else (u, fut.result(), None)
    finally:
        if own:
            pool.shutdown(wait=True, cancel_futures=True)
        else:  # the caller's pool stays, without this batch's queued units
            for fut in pending:
                fut.cancel()


def _distributed():
    try:
        import distributed
    except ImportError:
        raise SkidpadError(
            "--executor dask needs the optional extra; install it with pip install 'skidpad[cluster]'"
        ) from None
    return distributed


def run_dask(
    units: Sequence, work: Callable, *, jobs: int, scheduler: str | None = None, client: object | None = None
) -> Iterator[Outcome]:
    """Run units on a dask.distributed cluster.

    ``client`` (a ``distributed.Client``) is used as given; otherwise connect to ``scheduler``
    (``tcp://host:port``) or start a LocalCluster of ``jobs`` worker processes.
    """
    distributed = _distributed()
    own = None
    if client is None:
        if scheduler:
            client = own = distributed.Client(scheduler)
        else:
            cluster = distributed.LocalCluster(n_workers=jobs, threads_per_worker=1, dashboard_address=None)
            client = own = distributed.Client(cluster)
    try:
        futures = {client.submit(work, u, pure=False): u for u in units}
        for fut in distributed.as_completed(list(futures)):
            u = futures[fut]
            if fut.status == "error":
                yield u, None, fut.exception()
            else:
                yield u, fut.result(), None
    finally:
        if own is not None:
            cluster = getattr(own, "cluster", None)
            own.close()
            if cluster is not None and not scheduler:
                cluster.close()


def execute(
    units: Sequence, work: Callable, *, executor: str, jobs: int = 1,
    scheduler: str | None = None, client: object | None = None, pool: ProcessPoolExecutor | None = None,
) -> Iterator[Outcome]:
    """Dispatch to the named executor (one of :data:`EXECUTORS`); ``pool``: a started process
    pool for the processes executor (:func:`make_pool`)."""
    if executor == "serial":
        return run_serial(units, work)
    if executor == "processes":
        return run_processes(units, work, jobs=jobs, pool=pool)
    if executor == "dask":
        _distributed()  # fail before the batch starts when the extra is missing
        return run_dask(units, work, jobs=jobs, scheduler=scheduler, client=client)
    raise SkidpadError(f"--executor must be one of {', '.join(EXECUTORS)}, got {executor!r}")


__all__ = ["EXECUTORS", "execute", "make_pool", "run_serial", "run_processes", "run_dask", "start_method"]
