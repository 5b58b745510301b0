"""The only place a per-target random generator is derived from the run seed.

Every random draw of a target (its assessment, each RV stage, the figures) uses
``target_rng(seed, name, stage)``: a generator that depends on the run seed, the target name and the
stage only, never on the order of the targets, the chunking or the number of workers, so serial,
process-pool and dask runs give identical results. The generator is numpy's default (PCG64) seeded
with a :class:`numpy.random.SeedSequence` of the seed (low 32 bits) and the CRC-32 of the name (and of
the stage name, when one is given).
"""
from __future__ import annotations

import zlib

import numpy as np

from rhofollow.core.defaults import DEFAULT_SEED

__all__ = ["DEFAULT_SEED", "target_rng", "target_seed"]


def target_rng(seed: int, name: str, stage: str | None = None) -> np.random.Generator:
    """The generator of one target (and stage) for a run seed.

    Parameters
    ----------
    seed : int
        The run seed (only its low 32 bits are used).
    name : str
        The target name.
    stage : str, optional
        The stage or use of the draws (e.g. ``"mass"``, ``"lrt"``); ``None`` is the assessment's
        generator. Different stages get independent streams.

    Returns
    -------
    numpy.random.Generator
    """
    entropy = [int(seed) & 0xFFFFFFFF, zlib.crc32(name.encode())]
    if stage is not None:
        entropy.append(zlib.crc32(stage.encode()))
    return np.random.default_rng(np.random.SeedSequence(entropy))


def target_seed(seed: int, name: str) -> np.random.Generator:
    """The assessment's generator of one target: ``target_rng(seed, name)`` (the name older code uses).

    Parameters
    ----------
    seed : int
        The run seed.
    name : str
        The target name.

    Returns
    -------
    numpy.random.Generator
        The target's assessment generator.
    """
    return target_rng(seed, name)
