"""The assessment stage over a whole catalogue: serial, a process pool or a dask cluster.

Thin over :func:`rhofollow.core.executor.dispatch` (where the work runs) and
:func:`rhofollow.stages.assess.assess_catalogue` (what each part does). Each target's random stream
depends only on the run seed and its name, so every mode gives the same results.
"""
from __future__ import annotations

from rhofollow.core.executor import dispatch
from rhofollow.stages.assess import assess_catalogue

__all__ = ["assess_parallel", "assess_stream"]


def _assess_chunk(targets, kw):
    return assess_catalogue(targets, **kw)


def assess_parallel(targets, *, n_samples, prior, seed, transit_prob=True, workers=1, chunk=None,
                    progress=None, dask_address=None):
    """Assess ``targets`` with ``workers`` processes (1 = in this process) or on a dask cluster.

    Parameters
    ----------
    targets : sequence of validated catalogue targets (:class:`rhofollow.core.types.Target`)
    n_samples : int, posterior samples per target
    prior : str or EccPrior, eccentricity prior (a string is parsed once)
    seed : int, run seed; each target's stream depends on (seed, name) only
    transit_prob : bool, weight the eccentricity prior by the transit probability (1 + e sin w) / (1 - e^2)
    workers : int, processes (1 = in this process); chunk : int or None, targets per part
    progress : optional callable ``progress(k)``, called with the number of targets just finished
    dask_address : str or None, scheduler address of a dask.distributed cluster (overrides ``workers``)

    Returns
    -------
    list of Assessment, in input order
    """
    out = []
    for part in assess_stream(targets, n_samples=n_samples, prior=prior, seed=seed,
                              transit_prob=transit_prob, workers=workers, chunk=chunk,
                              dask_address=dask_address):
        out.extend(part)
        if progress:
            progress(len(part))
    return out


def assess_stream(targets, *, n_samples, prior, seed, transit_prob=True, workers=1, chunk=None,
                  dask_address=None):
    """Yield lists of Assessments chunk by chunk, in input order, for catalogues too large to hold.

    The caller reduces each chunk (records, written samples) and lets its samples go, so memory
    stays bounded by the chunk size times the window (:func:`dispatch`) whatever the catalogue size.

    Parameters
    ----------
    targets, n_samples, prior, seed, transit_prob, workers, chunk, dask_address :
        as for :func:`assess_parallel`

    Yields
    ------
    list of Assessment, one chunk at a time, in input order
    """
    if isinstance(prior, str):
        from rhofollow.physics.priors import parse_prior

        prior = parse_prior(prior)  # once, not once per part
    kw = dict(n_samples=n_samples, prior=prior, seed=seed, transit_prob=transit_prob)
    yield from dispatch(_assess_chunk, targets, workers=workers, dask_address=dask_address, chunk=chunk,
                        make_job=lambda part: (part, kw))
