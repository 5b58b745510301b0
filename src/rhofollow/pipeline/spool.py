"""Posterior samples kept on disk between the stages of a long run, so memory stays bounded.

A ``plan`` run needs every target's full sample set three times after its own chunk is done: the
RV time-to-confirm at reachable epochs, the sample files and the figures of the report. Holding
them all costs about 2.2 MiB per target at 20,000 samples. :class:`SampleSpool` writes each set
once, as it arrives, to a temporary folder (``.npy``, the exact float64 bits) and hands back a
:class:`SpooledSamples` that reads it again on first use; the spool keeps one loaded set at a time.
The folder is removed when the spool is closed or garbage-collected (or at interpreter exit).
A set that cannot be written (full disk, no temporary folder) stays in memory: nothing is lost.
"""
from __future__ import annotations

import os
import shutil
import tempfile
import weakref

import numpy as np

from rhofollow.core.samples import SAMPLE_COLUMNS, SampleSet

__all__ = ["SampleSpool", "SpooledSamples", "SpoolFile"]

_ARRAYS = tuple(SAMPLE_COLUMNS) + ("weights",)


def _read_set(path: str, name: str, meta: dict) -> SampleSet:
    """The sample set stored in the ``.npy`` file ``path``, bit for bit (no renormalisation)."""
    block = np.load(path, allow_pickle=False)
    s = SampleSet.__new__(SampleSet)       # no __post_init__: the weights are not renormalised
    s.name, s.meta = name, meta
    for i, c in enumerate(_ARRAYS):
        setattr(s, c, block[i].copy())
    return s


class SpoolFile:
    """A picklable reference to one spooled set: its file, name and meta (no arrays), so another
    process on this machine can read the set itself (:meth:`load`) instead of being sent it.

    Parameters
    ----------
    path : str
        The set's ``.npy`` file in the spool folder.
    name : str
        The target name.
    meta : dict
        The set's scalar metadata.
    """

    __slots__ = ("path", "name", "meta")

    def __init__(self, path: str, name: str, meta: dict):
        self.path, self.name, self.meta = path, name, meta

    def __getstate__(self):
        return (self.path, self.name, self.meta)

    def __setstate__(self, state):
        self.path, self.name, self.meta = state

    def load(self) -> SampleSet:
        """The full sample set, bit for bit as it was written (the spool must still be open).

        Returns
        -------
        SampleSet
        """
        return _read_set(self.path, self.name, self.meta)


class SpooledSamples:
    """A :class:`~rhofollow.core.samples.SampleSet` on disk: attribute access reads it back.

    ``name``, ``meta`` and ``n`` are held here (no read); every other attribute or method is the
    loaded set's (:meth:`SampleSpool.load`), so the handle stands wherever a sample set is read.

    Parameters
    ----------
    spool : the :class:`SampleSpool` that wrote it
    key : file stem inside the spool folder
    name, meta, n : the set's target name, scalar metadata and number of samples
    """

    __slots__ = ("_spool", "_key", "name", "meta", "n")

    def __init__(self, spool: "SampleSpool", key: str, name: str, meta: dict, n: int):
        self._spool, self._key, self.name, self.meta, self.n = spool, key, name, meta, n

    def load(self) -> SampleSet:
        """The full sample set, bit for bit as it was written.

        Returns
        -------
        SampleSet
        """
        return self._spool.load(self._key, self.name, self.meta)

    def detached(self) -> SpoolFile:
        """A reference to the set's file that pickles without the spool or the arrays.

        Returns
        -------
        SpoolFile
        """
        return SpoolFile(self._spool.path_of(self._key), self.name, self.meta)

    def __getattr__(self, attr):
        if attr.startswith("__"):
            raise AttributeError(attr)
        return getattr(self.load(), attr)

    def __repr__(self) -> str:
        return f"SpooledSamples({self.name!r}, n={self.n})"


class SampleSpool:
    """A temporary folder of sample sets (see the module notes).

    Parameters
    ----------
    directory : parent folder of the spool's temporary folder (default: the system's)
    """

    def __init__(self, directory=None):
        self._dir = None
        self._count = 0
        self._cache: tuple = (None, None)
        try:
            self._dir = tempfile.mkdtemp(prefix="rhofollow-samples-", dir=directory)
        except OSError:
            self._dir = None     # no temporary folder: every set stays in memory
        self._finalizer = weakref.finalize(self, shutil.rmtree, self._dir, True) if self._dir else None

    def put(self, samples):
        """Write ``samples`` and return its handle (the set itself when it cannot be written).

        Parameters
        ----------
        samples : SampleSet, a handle of this spool, or None

        Returns
        -------
        SpooledSamples, or ``samples`` unchanged (None, already spooled, or not writable)
        """
        if samples is None or isinstance(samples, SpooledSamples) or self._dir is None:
            return samples
        key = f"{self._count:07d}"
        path = os.path.join(self._dir, key + ".npy")
        try:
            np.save(path, np.stack([np.asarray(getattr(samples, c), dtype=float) for c in _ARRAYS]),
                    allow_pickle=False)
        except OSError:
            try:
                os.unlink(path)
            except OSError:
                pass
            return samples
        self._count += 1
        return SpooledSamples(self, key, samples.name, samples.meta, samples.n)

    def load(self, key: str, name: str, meta: dict) -> SampleSet:
        """The set written under ``key`` (the last one read is kept, so repeated reads are cheap).

        Parameters
        ----------
        key : handle key; name, meta : the set's target name and metadata

        Returns
        -------
        SampleSet
        """
        if self._cache[0] == key:
            return self._cache[1]
        s = _read_set(self.path_of(key), name, meta)
        self._cache = (key, s)
        return s

    def path_of(self, key: str) -> str:
        """The file of the set written under ``key``.

        Parameters
        ----------
        key : str
            Handle key.

        Returns
        -------
        str
            Path of its ``.npy`` file.
        """
        return os.path.join(self._dir, key + ".npy")

    def close(self) -> None:
        """Remove the spool folder (handles made by it can no longer be read)."""
        self._cache = (None, None)
        if self._finalizer is not None:
            self._finalizer()
