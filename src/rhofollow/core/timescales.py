"""Time scales and offline time handling: the project's one home for time conversions.

* JD (UTC scale) <-> ISO strings and datetimes: :func:`iso_to_jd`, :func:`jd_to_iso`,
  :func:`datetime_to_jd`, :func:`jd_to_datetime_utc` (plain arithmetic, no astropy);
* barycentric times: :func:`bjd_minus_jd` (BJD_TDB - JD_UTC of a target at one instant) and
  :func:`bjd_tdb_to_utc` (event times in BJD_TDB -> UTC at the observer), through astropy;
* astropy's Earth-orientation tables from the installed packages only (below).

rhofollow never touches the network. :func:`configure_offline` points astropy at the bundled
IERS-A table (``astropy-iers-data``: measured UT1-UTC and polar motion plus about a year of
predictions) and switches automatic downloads off. Dates past the end of that table are still
computed, with UT1-UTC held at the table's last value and polar motion at its long-term mean
(astropy's own fallback): |UT1-UTC| < 0.9 s by definition of UTC, so altitudes stay good to
about 15 arcsec, well inside the planning tolerance. The user gets **one** concise notice per
run (:class:`OfflineTablesWarning`) instead of astropy's and ERFA's warning per call.

Nothing happens at import time; the planning code calls :func:`configure_offline` before its
first astropy time conversion, and :func:`astropy_quietly` around the astropy calls whose
out-of-range warnings have already been folded into the notice.
"""
from __future__ import annotations

import contextlib
import threading
import warnings
from datetime import datetime, timedelta, timezone

import numpy as np

from rhofollow.core.types import Notice
from rhofollow.errors import RhofollowWarning

__all__ = ["OfflineTablesWarning", "TABLES_NOTICE", "configure_offline", "iers_table_end_jd", "beyond_tables",
           "notice_if_beyond_tables", "first_on_terminal", "astropy_quietly", "reset_notice", "iso_to_jd",
           "jd_to_iso", "datetime_to_jd", "jd_to_datetime_utc", "bjd_minus_jd", "bjd_tdb_to_utc"]

_MJD0 = datetime(1858, 11, 17, tzinfo=timezone.utc)   # MJD 0 = JD 2400000.5
_UNIX_EPOCH_JD = 2440587.5                              # 1970-01-01T00:00:00 UTC


class OfflineTablesWarning(RhofollowWarning):
    """Dates lie beyond the installed Earth-orientation tables; accuracy is degraded, not lost."""


#: The notice a document (``notices``) carries when its times lie past the installed Earth-orientation or
#: leap-second tables; the terminal shows it, or the run's :class:`OfflineTablesWarning`, once per run.
TABLES_NOTICE = Notice("some times lie beyond the installed Earth-orientation or leap-second tables "
                       "(no download attempted); UTC is extrapolated and may be off by a leap second",
                       "offline_tables")

_LOCK = threading.Lock()
# notice_given: the run's OfflineTablesWarning was issued; terminal_shown: the terminal has printed an
# offline-tables notice (the warning or a document's TABLES_NOTICE); texts: every such notice's text
_STATE = {"configured": False, "table_end_jd": None, "notice_given": False, "terminal_shown": False,
          "texts": {TABLES_NOTICE}}


def configure_offline() -> None:
    """Make astropy use the installed IERS-A table and never download (idempotent).

    Sets ``iers.conf.auto_download = False`` (bundled tables only, also for leap seconds) and
    ``iers.conf.auto_max_age = None`` (an old bundled table is not an error: interpolation
    past its end is clipped, see the module docstring).
    """
    with _LOCK:
        if _STATE["configured"]:
            return
        from astropy.utils import iers

        iers.conf.auto_download = False
        iers.conf.auto_max_age = None
        table = iers.IERS_Auto.open()
        _STATE["table_end_jd"] = float(table["MJD"][-1].value) + 2400000.5
        _STATE["configured"] = True


def iers_table_end_jd() -> float:
    """Last date covered by the installed Earth-orientation table.

    Returns
    -------
    float
        JD in the UTC scale (days).
    """
    configure_offline()
    return _STATE["table_end_jd"]


def beyond_tables(jd_max: float) -> bool:
    """Whether a date lies past the installed Earth-orientation table (no notice, no run state).

    Parameters
    ----------
    jd_max : float
        The latest date of a computation, JD in the UTC scale (days).

    Returns
    -------
    bool
        True when ``jd_max`` is after the table's last date (:func:`iers_table_end_jd`).
    """
    return bool(jd_max > iers_table_end_jd())


def notice_if_beyond_tables(jd_max: float, *, stacklevel: int = 3) -> bool:
    """Give the one-per-run notice if ``jd_max`` (JD UTC) is past the installed tables.

    Parameters
    ----------
    jd_max : float
        The latest date of a computation, JD in the UTC scale (days).
    stacklevel : int
        Passed to :func:`warnings.warn` (the frame the warning names).

    Returns
    -------
    bool
        True if the date is beyond the tables (whether or not the notice was already given).
    """
    end = iers_table_end_jd()
    if not jd_max > end:
        return False
    with _LOCK:
        first = not _STATE["notice_given"]
        _STATE["notice_given"] = True
    if first:
        from astropy.time import Time

        last = Time(end, format="jd", scale="utc").iso[:10]
        text = (f"dates after {last} are beyond the installed Earth-orientation tables "
                "(astropy-iers-data); UT1-UTC and polar motion are extrapolated, so times and "
                "altitudes are good to ~1 s and ~15 arcsec. Upgrade astropy-iers-data for full "
                "accuracy. (This notice is shown once per run.)")
        with _LOCK:
            _STATE["texts"].add(text)
        warnings.warn(text, OfflineTablesWarning, stacklevel=stacklevel)
    return True


def first_on_terminal(text: str) -> bool:
    """Whether the terminal should print this notice: False only for an offline-tables notice
    (the run's warning or a document's :data:`TABLES_NOTICE`) once one has been printed this run.

    Parameters
    ----------
    text : str
        The notice about to be printed.

    Returns
    -------
    bool
        True to print it (an offline-tables notice is then counted as shown).
    """
    with _LOCK:
        if text not in _STATE["texts"]:
            return True
        first = not _STATE["terminal_shown"]
        _STATE["terminal_shown"] = True
    return first


def reset_notice() -> None:
    """Forget that the notice was given and shown (for tests and long-lived sessions)."""
    with _LOCK:
        _STATE["notice_given"] = False
        _STATE["terminal_shown"] = False


@contextlib.contextmanager
def astropy_quietly():
    """Silence astropy's and ERFA's per-call out-of-range warnings (already folded into the notice).

    Only the warnings about IERS coverage (polar motion defaulting, stale tables) and ERFA's
    "dubious year" are silenced; everything else passes through.
    """
    from astropy.utils.exceptions import AstropyWarning

    with warnings.catch_warnings():
        warnings.filterwarnings("ignore", message=r".*polar motion", category=AstropyWarning)
        warnings.filterwarnings("ignore", message=r".*IERS", category=AstropyWarning)
        warnings.filterwarnings("ignore", message=r".*leap.second", category=AstropyWarning)
        warnings.filterwarnings("ignore", message=r".*dubious year")
        yield


def iso_to_jd(s) -> float:
    """Julian Date (UTC scale) of an ISO-8601 string, a datetime or a JD.

    Parameters
    ----------
    s : str, datetime.datetime or float
        ISO-8601 date or date-time (``Z`` or an offset allowed; naive means UTC), a datetime
        (naive means UTC), or a JD (days) passed through.

    Returns
    -------
    float
        Julian Date, UTC scale, days (leap seconds are not counted: every day has 86400 s).
    """
    if isinstance(s, (int, float, np.floating)):
        return float(s)
    dt = s if isinstance(s, datetime) else datetime.fromisoformat(str(s).strip().replace("Z", "+00:00"))
    if dt.tzinfo is None:
        dt = dt.replace(tzinfo=timezone.utc)
    return (dt - _MJD0).total_seconds() / 86400.0 + 2400000.5


def jd_to_iso(jd: float) -> str:
    """ISO-8601 UTC string of a Julian Date (UTC scale), rounded to the second.

    Parameters
    ----------
    jd : float
        Julian Date, UTC scale, days.

    Returns
    -------
    str
        ``YYYY-MM-DDTHH:MM:SSZ``.
    """
    dt = _MJD0 + timedelta(seconds=round((float(jd) - 2400000.5) * 86400.0))
    return dt.strftime("%Y-%m-%dT%H:%M:%SZ")


def datetime_to_jd(d: datetime) -> float:
    """JD (UTC scale, days) of a timezone-aware datetime.

    Parameters
    ----------
    d : datetime.datetime
        Aware datetime (any time zone).

    Returns
    -------
    float
        Julian date, UTC scale, days.

    Raises
    ------
    ValueError
        ``d`` is naive.
    """
    if d.tzinfo is None:
        raise ValueError("datetime must be timezone-aware")
    return d.timestamp() / 86400.0 + _UNIX_EPOCH_JD


def jd_to_datetime_utc(jd: float) -> datetime:
    """Aware UTC datetime of a JD (UTC scale, days), rounded to the microsecond.

    Parameters
    ----------
    jd : float
        Julian date, UTC scale, days.

    Returns
    -------
    datetime.datetime
        The same instant, tzinfo UTC.
    """
    return (datetime(1970, 1, 1, tzinfo=timezone.utc)
            + timedelta(microseconds=round((float(jd) - _UNIX_EPOCH_JD) * 86400e6)))


def bjd_minus_jd(ra_deg, dec_deg, jd_utc: float, location) -> np.ndarray:
    """BJD_TDB - JD_UTC (days) for targets at one UTC time seen from ``location``.

    The barycentric light-travel correction (astropy ``Time.light_travel_time``) plus TDB - UTC.
    Over one night it changes by under a second, so one value per target and night is used.

    Parameters
    ----------
    ra_deg, dec_deg : float or array_like
        Target directions (ICRS), degrees.
    jd_utc : float
        The instant, JD in the UTC scale (days).
    location : astropy.coordinates.EarthLocation or None
        The observer (None: the geocentre).

    Returns
    -------
    ndarray
        BJD_TDB - JD_UTC per target, days (at least 1-d).
    """
    import astropy.units as u
    from astropy.coordinates import SkyCoord
    from astropy.time import Time

    configure_offline()
    ra = np.atleast_1d(np.asarray(ra_deg, dtype=float))
    dec = np.atleast_1d(np.asarray(dec_deg, dtype=float))
    with astropy_quietly():
        t = Time(np.full(ra.shape, float(jd_utc)), format="jd", scale="utc", location=location)
        ltt = t.light_travel_time(SkyCoord(ra * u.deg, dec * u.deg), kind="barycentric")
        return (t.tdb.jd - t.utc.jd) + ltt.to_value(u.day)


def bjd_tdb_to_utc(bjd_tdb, ra_deg, dec_deg, location=None, as_iso=True):
    """Convert barycentric BJD_TDB event times to UTC at the observer.

    Solves t_obs + ltt(t_obs) = BJD_TDB for the observer's time (two fixed-point steps). The
    barycentric correction ltt is the geometry of astropy's ``Time.light_travel_time``
    (astropy's barycentric Earth position plus the site's GCRS position, projected on the
    target direction, over c), evaluated without frame objects for speed and tested against
    it. Then TDB is converted to UTC. Runs offline: IERS auto-download is off; stale or missing
    Earth-orientation data and dubious-year leap-second lookups (dates beyond the installed
    tables) are not fatal (microseconds, or at most a future leap second) and are summarised
    in one notice.

    Parameters
    ----------
    bjd_tdb : float or array_like
        Event times, BJD in the TDB scale (days).
    ra_deg, dec_deg : float or array_like
        Target directions (ICRS), degrees; broadcast with ``bjd_tdb``.
    location : astropy.coordinates.EarthLocation or None
        The observer (None: the geocentre).
    as_iso : bool
        Return ISO strings (True) or the observer's times as JD in TDB (False).

    Returns
    -------
    times : ndarray
        ISO 8601 UTC strings ``YYYY-MM-DDTHH:MM:SSZ`` (rounded down to the second), or with
        ``as_iso=False`` the observer's times as float JD in TDB (days); shaped like the
        broadcast inputs.
    notice : str
        The run's notice about extrapolated tables ("" when nothing was degraded).
    """
    import astropy.units as u
    from astropy.coordinates import get_body_barycentric
    from astropy.time import Time
    from astropy.utils import iers

    bjd, ra, dec = np.broadcast_arrays(np.asarray(bjd_tdb, dtype=float),
                                       np.asarray(ra_deg, dtype=float),
                                       np.asarray(dec_deg, dtype=float))
    if bjd.size == 0:
        return np.array([], dtype=str), ""
    ra_r, dec_r = np.radians(ra.ravel()), np.radians(dec.ravel())
    n_hat = np.array([np.cos(dec_r) * np.cos(ra_r), np.cos(dec_r) * np.sin(ra_r), np.sin(dec_r)])
    c_km_d = 299792.458 * 86400.0
    with iers.conf.set_temp("auto_download", False), \
            iers.conf.set_temp("auto_max_age", None), \
            iers.conf.set_temp("iers_degraded_accuracy", "warn"), \
            warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        bary = bjd.ravel()
        t_obs = bary.copy()
        for _ in range(2):
            # Same geometry as astropy's Time.light_travel_time(kind="barycentric"): the
            # observer's barycentric position (Earth + site in GCRS axes) projected on the
            # target direction, divided by c. Done without frame objects for speed.
            t = Time(t_obs, format="jd", scale="tdb")
            pos = get_body_barycentric("earth", t).xyz.to_value(u.km)
            if location is not None:
                pos = pos + location.get_gcrs_posvel(t)[0].xyz.to_value(u.km)
            t_obs = bary - np.sum(pos * n_hat, axis=0) / c_km_d
        if not as_iso:
            return t_obs.reshape(bjd.shape), _notice(caught)
        t_utc = Time(t_obs, format="jd", scale="tdb").utc
        iso = np.char.add(t_utc.strftime("%Y-%m-%dT%H:%M:%S").astype(str), "Z")
    return iso.reshape(bjd.shape), _notice(caught)


def _notice(caught) -> str:
    """The document notice about dates past the installed tables when ``caught`` holds any
    warning of the conversion ("" otherwise). No run state: every document that used the
    extrapolated tables says so; the terminal shows it once (:func:`first_on_terminal`)."""
    return TABLES_NOTICE if caught else ""
