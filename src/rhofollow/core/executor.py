"""Running the per-target assessment over many targets: serial, a process pool, or a dask cluster.

Each target's random stream depends only on the run seed and the target's name
(:func:`rhofollow.stages.assess.target_seed`), so every execution mode gives identical results. Work is sent
in chunks so memory stays bounded: only the chunk in flight holds its samples until returned.
"""
from __future__ import annotations

from concurrent.futures import ProcessPoolExecutor

from rhofollow.stages.assess import assess_catalogue

__all__ = ["assess_parallel", "assess_stream", "chunked"]


def chunked(seq, size):
    """Consecutive slices of ``seq`` of at most ``size`` items."""
    for i in range(0, len(seq), size):
        yield seq[i:i + size]


def _work(args):
    targets, kw = args
    return assess_catalogue(targets, **kw)


def assess_parallel(targets, *, n_samples, prior, seed, transit_prob=True, workers=1, chunk=32,
                    progress=None, dask_address=None):
    """Assess ``targets`` with ``workers`` processes (1 = in this process) or on a dask cluster.

    Results come back in input order. ``progress(k)`` is called with the number of targets finished.
    """
    targets = list(targets)
    kw = dict(n_samples=n_samples, prior=prior, seed=seed, transit_prob=transit_prob)
    if dask_address:
        from distributed import Client

        with Client(dask_address) as client:
            futures = client.map(_work, [(c, kw) for c in chunked(targets, chunk)], pure=False)
            out = []
            for f in futures:
                part = f.result()
                out.extend(part)
                if progress:
                    progress(len(part))
            return out
    if workers <= 1 or len(targets) <= chunk:
        return assess_catalogue(targets, progress=(lambda: progress(1)) if progress else None, **kw)
    out = []
    with ProcessPoolExecutor(max_workers=workers) as pool:
        for part in pool.map(_work, [(c, kw) for c in chunked(targets, chunk)]):
            out.extend(part)
            if progress:
                progress(len(part))
    return out


def assess_stream(targets, *, n_samples, prior, seed, transit_prob=True, workers=1, chunk=64,
                  dask_address=None):
    """Yield lists of Assessments chunk by chunk, in input order, for catalogues too large to hold.

    The caller reduces each chunk (records, written samples) and lets its samples go, so memory
    stays bounded by ``chunk`` (times the number of workers) whatever the catalogue size. With
    ``workers > 1`` the chunks are computed in a process pool, at most ``2 * workers`` in flight.
    """
    targets = list(targets)
    kw = dict(n_samples=n_samples, prior=prior, seed=seed, transit_prob=transit_prob)
    chunks = list(chunked(targets, chunk))
    if dask_address:
        from distributed import Client

        with Client(dask_address) as client:
            for c in chunks:
                yield client.submit(_work, (c, kw), pure=False).result()
        return
    if workers <= 1:
        for c in chunks:
            yield assess_catalogue(c, **kw)
        return
    with ProcessPoolExecutor(max_workers=workers) as pool:
        pending = []
        it = iter(chunks)
        for c in it:
            pending.append(pool.submit(_work, (c, kw)))
            if len(pending) >= 2 * workers:
                break
        while pending:
            done = pending.pop(0).result()
            nxt = next(it, None)
            if nxt is not None:
                pending.append(pool.submit(_work, (nxt, kw)))
            yield done
