"""Running per-target work over many targets: serial, a process pool, or a dask cluster.

:func:`dispatch` is the one place that decides where work runs; every stage (assessment,
occultations, RV planning) sends its chunks through it. Chunks are submitted in a bounded window
(twice the number of worker slots by default), and their results come back in input order as soon
as the oldest chunk is done, so a pool or a cluster of any size works on several chunks at once
while the client holds at most ``window`` chunks' results.

Each target's random stream depends only on the run seed and the target's name
(:func:`rhofollow.core.seeds.target_seed`), and every part runs with one BLAS thread
(:func:`single_blas_thread`) in this process, in a pool worker and on a dask worker alike, so every
execution mode gives byte-identical results. (OpenBLAS splits a large matrix product differently
with two threads than with one, and the edge kernels then add in another order: the RV test's
null quantile moved in its 13th digit between a two-thread client and one-thread dask workers.)
"""
from __future__ import annotations

import contextlib
import ctypes
import threading
from collections import deque
from concurrent.futures import ProcessPoolExecutor

__all__ = ["chunked", "dispatch", "chunk_size", "single_blas_thread", "auto_workers", "AUTO_MIN_ITEMS",
           "AUTO_MAX_WORKERS"]

#: ``--workers`` left to choose: one process for catalogues smaller than this (a pool's start-up
#: and copies cost more than they save), else one per CPU core up to :data:`AUTO_MAX_WORKERS`.
AUTO_MIN_ITEMS = 16
AUTO_MAX_WORKERS = 8

_BLAS_LOCK = threading.RLock()
_blas_state = {"depth": 0, "limiter": None}


@contextlib.contextmanager
def single_blas_thread():
    """Run the block with one BLAS thread, so that matrix products add in the same order
    whatever the machine's or the worker's thread settings (threadpoolctl finds every BLAS that
    numpy and scipy loaded, on any platform). Blocks may nest and overlap across threads; the
    counts before the first one are restored when the last one ends."""
    from threadpoolctl import threadpool_limits

    with _BLAS_LOCK:
        if _blas_state["depth"] == 0:
            _blas_state["limiter"] = threadpool_limits(limits=1, user_api="blas")
        _blas_state["depth"] += 1
    try:
        yield
    finally:
        with _BLAS_LOCK:
            _blas_state["depth"] -= 1
            if _blas_state["depth"] == 0:
                _blas_state["limiter"].restore_original_limits()
                _blas_state["limiter"] = None


_MALLOC = {"tuned": False}
_M_TRIM_THRESHOLD, _M_MMAP_THRESHOLD = -1, -3  # glibc mallopt parameters (malloc.h)


def _glibc_malloc_like_default() -> None:
    """Undo dask's malloc setting in this worker process (once; glibc only, else nothing).

    A dask nanny starts its workers with ``MALLOC_TRIM_THRESHOLD_=65536``; setting it switches off
    glibc's adaptive thresholds, so every temporary array above 128 KiB is mapped from the system
    and zeroed anew, and the RV simulations ran at half speed (mostly system time). Fixed
    thresholds of the size the adaptive rule reaches (mmap 32 MiB, trim 64 MiB) restore the speed.
    """
    if _MALLOC["tuned"]:
        return
    _MALLOC["tuned"] = True
    try:
        libc = ctypes.CDLL("libc.so.6")
        libc.mallopt.argtypes = [ctypes.c_int, ctypes.c_int]
        libc.mallopt(_M_MMAP_THRESHOLD, 32 << 20)
        libc.mallopt(_M_TRIM_THRESHOLD, 64 << 20)
    except (OSError, AttributeError):
        pass


def _run_on_dask_worker(fn, *args):
    """:func:`_run_part` on a dask worker, with glibc's usual malloc behaviour restored first."""
    _glibc_malloc_like_default()
    return _run_part(fn, *args)


def _run_part(fn, *args):
    """One part of :func:`dispatch`'s work, in whichever process runs it, with one BLAS thread."""
    with single_blas_thread():
        return fn(*args)


def auto_workers(n_items: int, cpus: int | None = None) -> int:
    """Processes for ``n_items`` targets when the user did not say: 1 below :data:`AUTO_MIN_ITEMS`
    targets, else one per CPU core (at most :data:`AUTO_MAX_WORKERS`). Every mode gives the same
    records, so the choice only changes the time taken.

    Parameters
    ----------
    n_items : int
        Number of targets (catalogue rows) to work on.
    cpus : int, optional
        CPU cores available (default: those this process may run on).

    Returns
    -------
    int
        Worker processes, >= 1.
    """
    import os

    if cpus is None:
        cpus = len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else (os.cpu_count() or 1)
    if n_items < AUTO_MIN_ITEMS:
        return 1
    return max(1, min(int(cpus), AUTO_MAX_WORKERS))


def chunked(seq, size):
    """Consecutive slices of ``seq`` of at most ``size`` items.

    Parameters
    ----------
    seq : a sequence; size : items per slice

    Returns
    -------
    iterator of slices
    """
    for i in range(0, len(seq), size):
        yield seq[i:i + size]


def chunk_size(n_items: int, slots: int, cap: int = 64) -> int:
    """Items per chunk: about four chunks per worker slot (load balance), at most ``cap``.

    Parameters
    ----------
    n_items : number of work items; slots : worker slots; cap : most items per chunk

    Returns
    -------
    int
    """
    return max(1, min(int(cap), -(-int(n_items) // (4 * max(1, int(slots))))))


def _windowed(submit, jobs, window: int):
    """Submit ``jobs`` keeping at most ``window`` in flight; yield their results in input order."""
    pending: deque = deque()
    for job in jobs:
        pending.append(submit(job))
        if len(pending) >= window:
            yield pending.popleft().result()
    while pending:
        yield pending.popleft().result()


def dispatch(fn, items, *, workers: int = 1, dask_address: str | None = None, chunk: int | None = None,
             make_job=None, window: int | None = None, cap: int = 64):
    """Yield ``fn(*make_job(part))`` for consecutive parts of ``items``, in input order.

    Parameters
    ----------
    fn : module-level callable (it must pickle), returning one result per part
    items : sequence of work items (targets, assessments)
    workers : processes; 1 runs every part in this process, one item per part (no copies made)
    dask_address : scheduler address of a dask.distributed cluster (overrides ``workers``)
    chunk : items per part; default :func:`chunk_size` for the number of worker slots, at most ``cap``
    make_job : ``part -> tuple`` of the arguments of ``fn``; default ``(part,)``
    window : parts in flight at once; default twice the number of worker slots (dask: the
        cluster's threads), which bounds the results waiting on the client
    """
    items = list(items)
    make_job = make_job or (lambda part: (part,))
    if dask_address:
        from distributed import Client

        with Client(dask_address, set_as_default=False) as client:
            slots = max(1, sum(client.nthreads().values()))
            size = chunk or chunk_size(len(items), slots, cap)
            jobs = (make_job(p) for p in chunked(items, size))
            yield from _windowed(lambda job: client.submit(_run_on_dask_worker, fn, *job, pure=False), jobs,
                                 window or 2 * slots)
        return
    workers = max(1, int(workers or 1))
    if workers <= 1 or len(items) < 2:
        for part in chunked(items, chunk or 1):
            yield _run_part(fn, *make_job(part))
        return
    size = chunk or chunk_size(len(items), workers, cap)
    jobs = (make_job(p) for p in chunked(items, size))
    pool = ProcessPoolExecutor(max_workers=workers)
    try:
        yield from _windowed(lambda job: pool.submit(_run_part, fn, *job), jobs, window or 2 * workers)
    finally:
        pool.shutdown(wait=True, cancel_futures=True)
