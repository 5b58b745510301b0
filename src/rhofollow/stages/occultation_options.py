"""Options of the occultation predictions and their checks (date range, coverage, band, filter curve).

Part of :mod:`rhofollow.stages.occultations`; every bad value raises :class:`EclipseInputError` with a
message naming the option.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from rhofollow.errors import InputError
from rhofollow.physics.constants import YEAR_D
from rhofollow.physics.thermal import BAND_MAX_UM, BAND_MIN_UM, tophat_band

__all__ = ["MAX_RANGE_YEARS", "EclipseInputError", "EclipseOptions", "parse_date", "check_band", "check_range",
           "band_response"]

#: Longest date range accepted (years): ephemeris errors grow with the epoch number.
MAX_RANGE_YEARS = 20.0


class EclipseInputError(InputError, ValueError):
    """A bad option value for the occultation predictions (message names the option)."""


@dataclass
class EclipseOptions:
    """Options of :func:`predict_occultations`.

    coverage : probability held by each event's credible region (0.5-0.995).
    band : (center, width) of a top-hat band in microns, used when ``filter_curve`` is None.
    filter_curve : (wavelength_um, response) arrays of a filter transmission curve.
    bond_albedo, redistribution : Cowan & Agol (2011) A_B and epsilon of the day side.
    geometric_albedo : A_g for the reflected light.
    baseline_h : out-of-eclipse baseline before and after the window, hours (None: equal to
        the median occultation duration, at least 1 h).
    location : astropy EarthLocation of the observer (None: the geocentre).
    scatter_ref_ppm, mag_ref : the photometer's scatter per minute of data (ppm) at the reference
        V magnitude; with both given every record gets ``occ_snr``, the expected S/N of one fully
        observed event (:func:`rhofollow.physics.occultation_snr.event_snr`), else ``None``.
    max_duration_samples : the exact durations are computed on at most this many samples
        (an evenly strided subset); timing and depth always use every sample.
    """

    coverage: float = 0.9
    band: tuple = (2.15, 0.32)
    filter_curve: tuple | None = None
    bond_albedo: float = 0.1
    redistribution: float = 0.2
    geometric_albedo: float = 0.1
    baseline_h: float | None = None
    location: object = None
    scatter_ref_ppm: float | None = None
    mag_ref: float | None = None
    max_duration_samples: int = 4000


def parse_date(value, what: str):
    """An astropy Time (UTC) from a string (ISO date or date-time) or a Time; clear error.

    Parameters
    ----------
    value : str or astropy.time.Time
        The date (UTC), e.g. ``2027-03-01`` or ``2027-03-01T18:00``.
    what : str
        What the date is, for the message (``"start date"``).

    Returns
    -------
    astropy.time.Time
        The date in the UTC scale.

    Raises
    ------
    EclipseInputError
        Not a date.
    """
    from astropy.time import Time

    if isinstance(value, Time):
        return value.utc
    try:
        return Time(str(value).strip(), scale="utc")
    except ValueError:
        raise EclipseInputError(f"{what} '{value}' is not a date; use ISO form such as "
                                "2027-03-01 or 2027-03-01T18:00") from None


def check_band(center_um: float, width_um: float) -> None:
    """Refuse a band outside the optical to mid-infrared range of the thermal model.

    Parameters
    ----------
    center_um, width_um : float
        Centre and full width of a top-hat band, microns.

    Raises
    ------
    EclipseInputError
        A non-finite centre, a width <= 0, or a band reaching outside the model's range.
    """
    lo, hi = center_um - 0.5 * width_um, center_um + 0.5 * width_um
    if not (np.isfinite(center_um) and np.isfinite(width_um) and width_um > 0):
        raise EclipseInputError(f"band {center_um}:{width_um} needs a finite centre and a "
                                "positive width in microns")
    if lo < BAND_MIN_UM or hi > BAND_MAX_UM:
        raise EclipseInputError(f"band {center_um}:{width_um} micron reaches {lo:g}-{hi:g} "
                                f"micron, outside the supported {BAND_MIN_UM}-{BAND_MAX_UM} micron")


def _check_filter(curve) -> tuple:
    lam = np.asarray(curve[0], dtype=float)
    resp = np.asarray(curve[1], dtype=float)
    if lam.ndim != 1 or lam.shape != resp.shape or lam.size < 2:
        raise EclipseInputError("the filter curve needs two columns of equal length (>= 2 rows)")
    if not (np.all(np.isfinite(lam)) and np.all(np.isfinite(resp))):
        raise EclipseInputError("the filter curve has non-finite values")
    if np.any(np.diff(lam) <= 0):
        raise EclipseInputError("the filter wavelengths must increase strictly")
    if lam[0] < BAND_MIN_UM or lam[-1] > BAND_MAX_UM:
        raise EclipseInputError(f"the filter spans {lam[0]:g}-{lam[-1]:g} micron, outside the "
                                f"supported {BAND_MIN_UM}-{BAND_MAX_UM} micron")
    if np.any(resp < 0) or not np.any(resp > 0):
        raise EclipseInputError("the filter response must be >= 0 and not all zero")
    return lam, resp


def check_range(start, end) -> tuple[float, float, str, str, float]:
    """The date range of the predictions, checked.

    Parameters
    ----------
    start, end : str or astropy.time.Time
        The range ends (UTC; ISO date or date-time strings).

    Returns
    -------
    start_tdb, end_tdb : float
        The ends as JD in the TDB scale (days).
    start_iso, end_iso : str
        The ends in ISO form (UTC).
    end_jd : float
        The end as JD in the UTC scale (days).

    Raises
    ------
    EclipseInputError
        Not a date, end not after start, or a range over :data:`MAX_RANGE_YEARS` years.
    """
    import warnings

    with warnings.catch_warnings():
        # Dates beyond the installed leap-second table: the UTC conversion reports it once.
        warnings.simplefilter("ignore")
        t_start, t_end = parse_date(start, "start date"), parse_date(end, "end date")
        span = (t_end - t_start).to_value("day")
        start_tdb, end_tdb = float(t_start.tdb.jd), float(t_end.tdb.jd)
        start_iso, end_iso = t_start.isot, t_end.isot
        end_jd = float(t_end.jd)
    if not span > 0:
        raise EclipseInputError(f"end date {end_iso[:16]} is not after start date "
                                f"{start_iso[:16]}")
    if span > MAX_RANGE_YEARS * YEAR_D:
        raise EclipseInputError(f"date range of {span / YEAR_D:.1f} years is longer than the "
                                f"{MAX_RANGE_YEARS:g} years allowed (ephemeris errors grow with "
                                "every epoch); split it or shorten it")
    return start_tdb, end_tdb, start_iso, end_iso, end_jd


def band_response(opts: EclipseOptions) -> tuple[np.ndarray, np.ndarray, dict]:
    """The band of the depth model: the filter curve when given, else the top-hat band.

    Parameters
    ----------
    opts : EclipseOptions
        ``filter_curve`` (wavelength in microns, response) or ``band`` (centre, width in microns).

    Returns
    -------
    lam : ndarray
        Wavelengths, microns.
    resp : ndarray
        Response at ``lam`` (relative, >= 0).
    desc : dict
        The band as the JSON document gives it (microns).

    Raises
    ------
    EclipseInputError
        A band or filter outside the thermal model's range, or a malformed filter curve.
    """
    if opts.filter_curve is not None:
        lam, resp = _check_filter(opts.filter_curve)
        return lam, resp, {"filter": True, "min_um": float(lam[0]), "max_um": float(lam[-1])}
    check_band(*opts.band)
    lam, resp = tophat_band(*opts.band)
    return lam, resp, {"center_um": float(opts.band[0]), "width_um": float(opts.band[1])}
