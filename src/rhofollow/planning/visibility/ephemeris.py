"""Night ephemerides: the Sun, the Moon and the site's frame on a coarse grid per night.

Times are plain floats, JD in the UTC scale (astropy ``Time`` only inside, at the edges).

* Sun and Moon: apparent geocentric positions from ERFA (``moon98`` for the Moon every
  ``ephemeris_step_minutes``, default 60; ``epv00`` for the Earth about every 6 h, with annual
  aberration added to the Sun's direction), rotated once per night into the CIRS (celestial
  intermediate system: equator and CIO of date) with ERFA ``c2i06a``, and linearly interpolated
  in time (:func:`interp_rows`). The Moon's illuminated fraction is (1 + cos i) / 2 with i the
  Sun-Moon-Earth phase angle (as astroplan's ``moon_illumination``).
* Targets: the ERFA ``apci13`` astrometry record of the night's middle is kept, so the engine
  turns ICRS (ra, dec) into CIRS with one ``atciq`` call per night.
* Rotation of the Earth: the Earth rotation angle (ERFA ``era00``, UT1 = UTC + DUT1 of the night
  from the installed IERS table) puts the site's zenith, east and north unit vectors in CIRS
  (:class:`SiteFrame`): with L = ERA + longitude, Z = (cos phi cos L, cos phi sin L, sin phi).
* Sun events: the evening (first downward) and morning (last upward) crossings of the sunset and
  twilight altitudes between local noon and the next local noon, bracketed on a 5-min grid and
  refined by vectorised bisection, then moved 1 s into the dark side.

Neglected: polar motion (< 0.5 arcsec) and diurnal aberration (0.3 arcsec).
"""
from __future__ import annotations

import datetime as _dt
import math
from dataclasses import dataclass, field

import numpy as np

from rhofollow.core.timescales import astropy_quietly, notice_if_beyond_tables
from rhofollow.planning.visibility.frame import SiteFrame, radec_to_unit, unit_vectors  # noqa: F401 (re-exported)
from rhofollow.core.timescales import datetime_to_jd, jd_to_datetime_utc  # noqa: F401  (their home)

__all__ = ["NightGrid", "NightEphemeris", "SiteFrame", "SUNSET_ALTITUDE_DEG", "datetime_to_jd",
           "jd_to_datetime_utc", "interp_rows", "unit_vectors", "radec_to_unit", "compute_nights",
           "sun_events"]

#: Sun-centre altitude of sunset and sunrise: -0 deg 50 arcmin (34' refraction + 16' semidiameter),
#: REFERENCE.md section 12.
SUNSET_ALTITUDE_DEG = -50.0 / 60.0

_SEARCH_STEP_MIN = 5.0  # bracketing grid for the Sun events
_EDGE_MARGIN = 1.0 / 86400.0   # night boundaries are moved 1 s into the dark side
_C_AU_PER_DAY = 299792.458 * 86400.0 / 149597870.700   # speed of light (exact) in au/day
_BISECTIONS = 16        # 5 min / 2^16 < 0.01 s


@dataclass(frozen=True)
class NightGrid:
    """One night at a site, labelled by the local calendar date of its evening.

    All times are JD (UTC). ``dusk_jd`` / ``dawn_jd`` are the ends of the site's chosen twilight
    (the night proper, ``start_jd`` / ``end_jd``); ``sunset_jd`` / ``sunrise_jd`` use the Sun
    centre at ``sunset_altitude_deg``. An event that does not happen (polar day or night) is NaN.
    ``kind`` is "normal", "no_night" (the Sun never gets below the twilight limit: ``times_jd`` is
    empty) or "dark_all_day" (never above it: the night runs from local noon to local noon).
    """

    date: _dt.date
    noon_jd: float
    next_noon_jd: float
    sunset_jd: float
    sunrise_jd: float
    dusk_jd: float
    dawn_jd: float
    twilight: str
    kind: str
    step_minutes: float = 5.0
    moon_illumination: float = float("nan")   # at the middle of the night

    @property
    def start_jd(self) -> float:
        """Start of the observable night (end of evening twilight), JD UTC."""
        if self.kind == "dark_all_day":
            return self.noon_jd
        return self.dusk_jd

    @property
    def end_jd(self) -> float:
        """End of the observable night (start of morning twilight), JD UTC."""
        if self.kind == "dark_all_day":
            return self.next_noon_jd
        return self.dawn_jd

    @property
    def duration_hours(self) -> float:
        """Length of the observable night, hours (0 without a night)."""
        return 0.0 if self.kind == "no_night" else (self.end_jd - self.start_jd) * 24.0

    @property
    def times_jd(self) -> np.ndarray:
        """Regular grid from the night's start, every ``step_minutes``, up to its end (JD UTC)."""
        if self.kind == "no_night":
            return np.empty(0)
        step = self.step_minutes / 1440.0
        n = int(math.floor((self.end_jd - self.start_jd) / step + 1e-9)) + 1
        return self.start_jd + step * np.arange(n)

    def start_utc(self) -> _dt.datetime:
        """Start of the observable night as an aware UTC datetime."""
        return jd_to_datetime_utc(self.start_jd)

    def end_utc(self) -> _dt.datetime:
        """End of the observable night as an aware UTC datetime."""
        return jd_to_datetime_utc(self.end_jd)


@dataclass
class NightEphemeris:
    """The coarse ephemeris of one night (what the engine caches per night)."""

    grid: NightGrid
    t0: float                  # first coarse time, JD UTC
    step: float                # coarse step, days
    sun: np.ndarray            # (K, 3) apparent geocentric position in CIRS axes, au
    moon: np.ndarray           # (K, 3)
    illum: np.ndarray          # (K,)
    dut1: float                # UT1 - UTC, days
    astrom: np.ndarray = field(repr=False)   # ERFA astrom record for ICRS -> CIRS at mid-night


def interp_rows(t0, step, table, t):
    """Linear interpolation of the rows of ``table`` (K, ...) at times ``t`` on the grid t0 + k step.

    Parameters
    ----------
    t0, step : float
        First grid time and grid step (days).
    table : ndarray (K,) or (K, 3)
        Tabulated values.
    t : array-like
        Times (days, same scale as ``t0``).

    Returns
    -------
    ndarray
        Shape ``t.shape`` (or ``t.shape + (3,)`` for a 2-D table).
    """
    x = (np.asarray(t) - t0) / step
    k = np.clip(np.floor(x).astype(int), 0, table.shape[0] - 2)
    f = x - k
    if table.ndim == 2:
        f = f[..., None]
    return table[k] * (1.0 - f) + table[k + 1] * f


def _sun_moon_cirs(grid, mids, k, ephemeris_step_minutes):
    """Apparent geocentric Sun and Moon (au, CIRS axes) on each night's coarse grid.

    ``grid`` (n, K) holds JD UTC times, ``mids`` (n,) the nights' middles. Returns the Sun and
    Moon positions (n, K, 3), the Moon's illuminated fraction (n, K), DUT1 per night (days) and
    the ERFA astrom records of the nights' middles.
    """
    import erfa
    from astropy.time import Time

    n = grid.shape[0]
    with astropy_quietly():
        tm = Time(mids, format="jd", scale="utc")
        dut1 = np.asarray(tm.delta_ut1_utc, dtype=float) / 86400.0
        tmt = tm.tt
        tt_minus_utc = (tmt.jd1 - tm.jd1) + (tmt.jd2 - tm.jd2)               # days, per night
        c2i = erfa.c2i06a(tmt.jd1, tmt.jd2)                                 # (n, 3, 3)
        astrom, _eo = erfa.apci13(tmt.jd1, tmt.jd2)
        tt = grid + tt_minus_utc[:, None]
        # the Sun moves 0.25 deg in 6 h: evaluate the (costly) Earth ephemeris every ~6 h only
        sub = np.unique(np.r_[np.arange(0, k, max(1, round(360 / ephemeris_step_minutes))), k - 1])
        pvh, pvb = erfa.epv00(tt[:, sub], 0.0)                              # au, au/d (BCRS ~ GCRS axes)
        moon_pv = erfa.moon98(tt, 0.0)
    r_h = pvh["p"]
    # apparent Sun: geometric direction plus annual aberration (v/c), Sun at rest heliocentrically
    sun_sub = -r_h + np.linalg.norm(r_h, axis=-1, keepdims=True) * pvb["v"] / _C_AU_PER_DAY
    x = np.arange(k)
    sun = np.stack([np.stack([np.interp(x, sub, sun_sub[i, :, c]) for c in range(3)], -1)
                    for i in range(n)])
    moon = moon_pv["p"]
    # Moon's illuminated fraction from the Sun-Moon-Earth phase angle i (geocentric)
    to_sun, to_earth = sun - moon, -moon
    cos_i = np.sum(to_sun * to_earth, -1) / (np.linalg.norm(to_sun, axis=-1)
                                             * np.linalg.norm(to_earth, axis=-1))
    illum = 0.5 * (1.0 + cos_i)
    sun_c = np.einsum("nij,nkj->nki", c2i, sun)                               # CIRS, au
    moon_c = np.einsum("nij,nkj->nki", c2i, moon)
    return sun_c, moon_c, illum, dut1, astrom


def compute_nights(site_frame: SiteFrame, dates: list[_dt.date], noons, next_noons, *,
                   n_coarse: int, ephemeris_step_minutes: float, step_minutes: float,
                   sunset_altitude_deg: float, twilight_altitude_deg: float, twilight: str
                   ) -> list[NightEphemeris]:
    """Coarse Sun/Moon ephemeris and Sun events of several nights in one batch of ERFA calls.

    Parameters
    ----------
    site_frame : SiteFrame
    dates : list of datetime.date
        Local dates of the nights' evenings.
    noons, next_noons : ndarray (n,)
        Local noon of each date and of the next day, JD UTC (days).
    n_coarse : int
        Coarse grid points per night (from local noon - 1 h, every ``ephemeris_step_minutes``).
    ephemeris_step_minutes, step_minutes : float
        Coarse ephemeris step and the night grid's step (minutes).
    sunset_altitude_deg, twilight_altitude_deg : float
        Sun-centre altitudes (deg) of sunset/sunrise and of the end of twilight.
    twilight : str
        Name of the twilight (stored in each :class:`NightGrid`).

    Returns
    -------
    list of NightEphemeris
        One per date, with its :class:`NightGrid`.
    """
    n, k = len(dates), n_coarse
    step = ephemeris_step_minutes / 1440.0
    t0 = noons - 1.0 / 24.0
    grid = t0[:, None] + step * np.arange(k)[None, :]                  # (n, K) JD UTC
    mids = 0.5 * (noons + next_noons)
    # stacklevel 5: notice -> compute_nights -> engine cache -> engine method -> the caller
    notice_if_beyond_tables(float(grid.max()), stacklevel=5)
    sun_c, moon_c, illum, dut1, astrom = _sun_moon_cirs(grid, mids, k, ephemeris_step_minutes)
    ephs = [NightEphemeris(grid=None, t0=float(t0[i]), step=step, sun=sun_c[i], moon=moon_c[i],
                           illum=illum[i], dut1=float(dut1[i]), astrom=astrom[i])
            for i in range(n)]
    events = sun_events(site_frame, ephs, noons, next_noons, sunset_altitude_deg,
                        twilight_altitude_deg)
    for i, (e, d) in enumerate(zip(ephs, dates)):
        ev = events[i]
        e.grid = NightGrid(date=d, noon_jd=float(noons[i]), next_noon_jd=float(next_noons[i]),
                           sunset_jd=ev["set"], sunrise_jd=ev["rise"], dusk_jd=ev["dusk"],
                           dawn_jd=ev["dawn"], twilight=twilight,
                           kind=ev["kind"], step_minutes=step_minutes,
                           moon_illumination=float(interp_rows(e.t0, e.step, e.illum,
                                                               np.array([mids[i]]))[0]))
    return ephs


def _sun_altitude_fn(site_frame: SiteFrame, ephs):
    """A function t (n, m) JD UTC -> Sun altitude (n, m), degrees, night i on row i."""
    n = len(ephs)
    sun_all = np.stack([e.sun for e in ephs])
    t0 = np.array([e.t0 for e in ephs])
    dut1 = np.array([e.dut1 for e in ephs])
    step = ephs[0].step

    def sun_alt(t):
        x = (t - t0[:, None]) / step
        k = np.clip(np.floor(x).astype(int), 0, sun_all.shape[1] - 2)
        f = (x - k)[..., None]
        rows = np.arange(n)[:, None]
        z, obs = site_frame.zenith(t + dut1[:, None])
        u = unit_vectors(sun_all[rows, k] * (1.0 - f) + sun_all[rows, k + 1] * f - obs)
        return np.degrees(np.arcsin(np.clip(np.sum(u * z, -1), -1, 1)))

    return sun_alt


def _crossing(sun_alt, tgrid, hits, level, falling: bool) -> np.ndarray:
    """The first falling (or last rising) crossing of ``level`` per night, refined by bisection
    and moved 1 s to the dark side; NaN where the grid shows no such crossing (JD UTC)."""
    n, m = tgrid.shape
    rows = np.arange(n)
    has = hits.any(1)
    j = np.argmax(hits, 1) if falling else m - 2 - np.argmax(hits[:, ::-1], 1)
    lo, hi = tgrid[rows, j], tgrid[rows, j + 1]
    for _ in range(_BISECTIONS):
        mid = 0.5 * (lo + hi)
        a = sun_alt(mid[:, None])[:, 0] >= level
        move_lo = a == falling
        lo = np.where(move_lo, mid, lo)
        hi = np.where(move_lo, hi, mid)
    # step 1 s to the dark side of the crossing (the Sun moves ~10 arcsec/s there), so the
    # night's first and last grid times are dark by this engine's test and by astropy's too
    # (they agree to ~1 arcsec)
    return np.where(has, hi + _EDGE_MARGIN if falling else lo - _EDGE_MARGIN, np.nan)


def _night_kind(above_row, ev: dict) -> str:
    """'normal', 'no_night' or 'dark_all_day' from the Sun-above-twilight flags of one night."""
    if np.all(above_row):
        return "no_night"
    if np.all(~above_row):
        return "dark_all_day"
    if not (np.isfinite(ev["dusk"]) and np.isfinite(ev["dawn"])):
        # the Sun is below the limit at one of the noons (high latitude)
        return "dark_all_day" if not above_row[0] else "no_night"
    return "normal"


def sun_events(site_frame: SiteFrame, ephs, noons, next_noons, sunset_altitude_deg: float,
               twilight_altitude_deg: float) -> list[dict]:
    """Sunset, sunrise, dusk and dawn of each night and the night's kind.

    Parameters
    ----------
    site_frame : SiteFrame
    ephs : list of NightEphemeris
        The nights (their coarse Sun positions).
    noons, next_noons : ndarray (n,)
        Local noon of each night's date and of the next day, JD UTC (days).
    sunset_altitude_deg, twilight_altitude_deg : float
        Sun-centre altitudes (deg) of sunset/sunrise and of the end of twilight.

    Returns
    -------
    list of dict
        Per night: ``set``, ``rise``, ``dusk``, ``dawn`` (JD UTC, NaN if the event does not
        happen) and ``kind``. Crossings are bracketed on a 5-min grid and bisected 16 times
        (5 min / 2^16 < 0.01 s), vectorised over nights.
    """
    n = len(ephs)
    sun_alt = _sun_altitude_fn(site_frame, ephs)
    s = _SEARCH_STEP_MIN / 1440.0
    m = int(np.ceil(np.max(next_noons - noons) / s)) + 1
    tgrid = np.minimum(noons[:, None] + s * np.arange(m)[None, :], next_noons[:, None])
    alt = sun_alt(tgrid)
    res = [dict() for _ in range(n)]
    for (ev, mo), lev in ((("set", "rise"), sunset_altitude_deg),
                          (("dusk", "dawn"), twilight_altitude_deg)):
        above = alt >= lev
        down = above[:, :-1] & ~above[:, 1:]
        up = ~above[:, :-1] & above[:, 1:]
        for key, hits, falling in ((ev, down, True), (mo, up, False)):
            val = _crossing(sun_alt, tgrid, hits, lev, falling)
            for i in range(n):
                res[i][key] = float(val[i])
        if ev == "dusk":
            for i in range(n):
                res[i]["kind"] = _night_kind(above[i], res[i])
    return res
