"""The per-target sample files: ``<stem>.ecsv`` or ``<stem>.fits``, serial or in worker processes.

Two formats hold the same table (:meth:`rhofollow.core.samples.SampleSet.to_table`: the same
columns, units and meta, every float64 value bit for bit):

* ``ecsv``: text (:meth:`~rhofollow.core.samples.SampleSet.to_ecsv_text`), readable by eye and by
  ``astropy.table.Table.read``; on the demo targets at 20,000 samples about 5.7 MB and 0.23 s of CPU
  per target (the shortest repr of every float; ``bench/bench_samples.py``);
* ``fits``: a FITS binary table (:meth:`~rhofollow.core.samples.SampleSet.to_fits_bytes`), about
  2.4 MB and 11 ms per target;
* ``auto`` (the default): ECSV for a run of at most :data:`AUTO_FITS_ABOVE` targets, FITS above.

With more than one worker the files are written by a process pool
(:func:`rhofollow.core.executor.dispatch`, chunks of targets in input order). A spooled set
(:class:`rhofollow.pipeline.spool.SpooledSamples`) is sent as a reference to its spool file, which
the worker reads, so no arrays cross between processes. Every file's bytes depend on its samples
only: a pool writes the same files as one process.
"""
from __future__ import annotations

from pathlib import Path

from rhofollow.io.atomic import atomic_write_bytes
from rhofollow.io.safety import file_stem

__all__ = ["SAMPLE_FORMATS", "AUTO_FITS_ABOVE", "resolve_sample_format", "sample_file_name", "sample_file_bytes",
           "write_sample_files", "sample_files_note",
           "sample_files_text"]

#: Values of ``--sample-format``.
SAMPLE_FORMATS = ("auto", "ecsv", "fits")

#: ``auto`` writes ECSV for a run of at most this many assessed targets, FITS above: at 200 targets
#: of 20,000 samples the ECSV files cost about 46 s of CPU and 1.1 GB, the FITS files 2 s and 0.5 GB
#: (``bench/bench_samples.py``: 228 ms and 5.7 MB against 10.6 ms and 2.4 MB per target).
AUTO_FITS_ABOVE = 200

_LABELS = {"ecsv": "ECSV text", "fits": "FITS binary tables"}


def resolve_sample_format(requested: str, n_targets: int) -> str:
    """The format the sample files are written in.

    Parameters
    ----------
    requested : str
        ``"auto"``, ``"ecsv"`` or ``"fits"`` (``--sample-format``).
    n_targets : int
        Targets assessed in the run (catalogue rows that reached the assessment).

    Returns
    -------
    str
        ``"ecsv"`` or ``"fits"``: ``auto`` gives ECSV up to :data:`AUTO_FITS_ABOVE` targets.

    Raises
    ------
    ValueError
        An unknown format.
    """
    if requested not in SAMPLE_FORMATS:
        raise ValueError(f"sample format {requested!r}: choose one of {', '.join(SAMPLE_FORMATS)}")
    if requested != "auto":
        return requested
    return "ecsv" if n_targets <= AUTO_FITS_ABOVE else "fits"


def sample_files_note(requested: str, fmt: str) -> dict:
    """How the run's sample files were written: the ``sample_files`` entry of the results document.

    Parameters
    ----------
    requested : str
        The ``--sample-format`` value.
    fmt : str
        The format used (:func:`resolve_sample_format`).

    Returns
    -------
    dict
        ``format`` (``"ecsv"`` or ``"fits"``), ``files`` (the glob inside the report folder),
        ``requested`` and, for ``auto``, ``auto_fits_above`` (:data:`AUTO_FITS_ABOVE`).
    """
    note = {"format": fmt, "files": f"samples/*.{fmt}", "requested": requested}
    if requested == "auto":
        note["auto_fits_above"] = AUTO_FITS_ABOVE
    return note


def sample_files_text(note: dict | None) -> str:
    """The summary's words for the sample files of :func:`sample_files_note`.

    Parameters
    ----------
    note : dict or None
        The results document's ``sample_files`` (None: an older document, ECSV).

    Returns
    -------
    str
        For example ``samples/*.fits (weighted posterior samples, FITS binary tables; --sample-format
        auto: ECSV up to 200 targets, FITS above)``.
    """
    if not note:
        return "samples/*.ecsv (weighted posterior samples)"
    text = f"{note['files']} (weighted posterior samples, {_LABELS.get(note['format'], note['format'])}"
    if note.get("auto_fits_above") is not None:
        text += f"; --sample-format auto: ECSV up to {note['auto_fits_above']} targets, FITS above"
    return text + ")"


def sample_file_name(name: str, fmt: str) -> str:
    """File name of a target's sample file.

    Parameters
    ----------
    name : str
        The target name.
    fmt : str
        ``"ecsv"`` or ``"fits"``.

    Returns
    -------
    str
        ``<stem>.<fmt>`` (:func:`rhofollow.io.safety.file_stem` of the name).
    """
    return f"{file_stem(name)}.{fmt}"


def sample_file_bytes(samples, fmt: str) -> bytes:
    """The bytes of a sample file.

    Parameters
    ----------
    samples : SampleSet, a spooled handle, or a reference with ``load()`` (a spool file)
        The target's samples.
    fmt : str
        ``"ecsv"`` or ``"fits"``.

    Returns
    -------
    bytes
        The ECSV text (UTF-8) or the FITS file.
    """
    if not hasattr(type(samples), "to_table"):
        samples = samples.load()               # a spooled handle or a spool file: read the set
    if fmt == "fits":
        return samples.to_fits_bytes()
    if fmt == "ecsv":
        return samples.to_ecsv_text().encode("utf-8")
    raise ValueError(f"sample format {fmt!r}: choose ecsv or fits")


def _write_part(directory: str, fmt: str, part) -> list[str]:
    """Write the sample files of ``part`` (``(name, samples)`` pairs) into ``directory``; their names."""
    names = []
    for name, samples in part:
        fname = sample_file_name(name, fmt)
        atomic_write_bytes(Path(directory) / fname, sample_file_bytes(samples, fmt))
        names.append(fname)
    return names


def _portable(samples):
    """What a worker process is sent: a spooled set's file reference, else the set itself."""
    detach = getattr(type(samples), "detached", None)
    return detach(samples) if detach is not None else samples


def write_sample_files(items, directory, fmt: str, *, workers: int = 1, progress=None) -> list[Path]:
    """Write one sample file per ``(name, samples)`` pair into ``directory``.

    Parameters
    ----------
    items : iterable of (str, SampleSet or spooled handle)
        Target names and their samples.
    directory : str or os.PathLike
        The folder (created when missing).
    fmt : str
        ``"ecsv"`` or ``"fits"`` (see :func:`resolve_sample_format`).
    workers : int
        Processes; above 1 (and with two targets or more) a process pool writes chunks of targets.
    progress : callable, optional
        ``progress(k)``: called with the number of files written as they come.

    Returns
    -------
    list of pathlib.Path
        The files written, in the order of ``items``; the same bytes whatever ``workers``.
    """
    from rhofollow.core.executor import dispatch

    d = Path(directory)
    d.mkdir(parents=True, exist_ok=True)
    items = [(name, s) for name, s in items]
    advance = progress or (lambda k=1: None)
    parallel = int(workers or 1) > 1 and len(items) > 1
    if parallel:
        items = [(name, _portable(s)) for name, s in items]
    written: list[Path] = []
    for names in dispatch(_write_part, items, workers=workers if parallel else 1,
                          make_job=lambda part: (str(d), fmt, part)):
        written += [d / n for n in names]
        advance(len(names))
    return written
