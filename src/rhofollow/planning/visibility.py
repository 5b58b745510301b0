"""Fast visibility: Sun, Moon and targets over many nights, vectorised over targets x times.

Method
------
Times are plain floats: **JD in the UTC scale** everywhere in this module (inputs, outputs and
:class:`NightGrid`); astropy ``Time`` appears only inside, at the edges. Altitudes are geometric
(no refraction), like astropy's ``AltAz`` with pressure 0 and astroplan's default ``Observer``.

The heavy geometry is done with astropy/ERFA once per night on a coarse grid, and the rest is
linear algebra:

* Sun and Moon: apparent geocentric positions from ERFA (``moon98`` for the Moon every
  ``ephemeris_step_minutes``, default 60; ``epv00`` for the Earth about every 6 h, with annual
  aberration added to the Sun's direction), rotated once per night into the CIRS (celestial
  intermediate system: equator and CIO of date) with ERFA ``c2i06a``, and linearly interpolated
  in time. The site's geocentric position is subtracted at each requested time (exact diurnal
  parallax, about 1 deg for the Moon). The Moon's illuminated fraction is (1 + cos i) / 2 with i
  the Sun-Moon-Earth phase angle (as astroplan's ``moon_illumination``).
* Targets: ICRS (ra, dec) -> CIRS once per night with ERFA ``apci13`` + ``atciq`` (precession,
  nutation, frame bias, annual aberration, light deflection), evaluated at the night's middle
  (the change over a night is < 0.1 arcsec).
* Rotation of the Earth: the Earth rotation angle (ERFA ``era00``, UT1 = UTC + DUT1 of the night
  from the installed IERS table) puts the site's zenith, east and north unit vectors in CIRS:
  with L = ERA + longitude, Z = (cos phi cos L, cos phi sin L, sin phi). Then sin(alt) = u . Z and
  az = atan2(u . E, u . N): one (targets x 3) @ (3 x times) product per quantity.

Neglected: polar motion (< 0.5 arcsec) and diurnal aberration (0.3 arcsec). Night boundaries come
from vectorised bisection on the interpolated Sun altitude (bracketed on a 5-min grid), then moved
1 s into the dark side so the grid ends pass any sub-arcsecond-different check.

Caching: each night's coarse ephemeris and boundaries live in a bounded LRU cache owned by the
:class:`VisibilityEngine` instance, keyed by the local date of the evening. No module-level state.
"""
from __future__ import annotations

import datetime as _dt
import math
from collections import OrderedDict
from dataclasses import dataclass, field

import numpy as np

from rhofollow.core.timescales import astropy_quietly, configure_offline, notice_if_beyond_tables
from rhofollow.planning.site import Site

__all__ = ["NightGrid", "VisibilityEngine", "WindowObservability", "jd_to_datetime_utc",
           "datetime_to_jd", "SUNSET_ALTITUDE_DEG"]

#: Sun-centre altitude of sunset and sunrise: -0 deg 50 arcmin (34' refraction + 16' semidiameter),
#: REFERENCE.md section 12.
SUNSET_ALTITUDE_DEG = -50.0 / 60.0

_UNIX_EPOCH_JD = 2440587.5
_DEG = math.pi / 180.0
_N_COARSE = 56          # coarse points per night: noon - 1 h ... noon + 26.5 h at 30 min
_SEARCH_STEP_MIN = 5.0  # bracketing grid for the Sun events
_EDGE_MARGIN = 1.0 / 86400.0   # night boundaries are moved 1 s into the dark side
_C_AU_PER_DAY = 299792.458 * 86400.0 / 149597870.700   # speed of light (exact) in au/day


def datetime_to_jd(d: _dt.datetime) -> float:
    """JD (UTC) of an aware datetime."""
    if d.tzinfo is None:
        raise ValueError("datetime must be timezone-aware")
    return d.timestamp() / 86400.0 + _UNIX_EPOCH_JD


def jd_to_datetime_utc(jd: float) -> _dt.datetime:
    """Aware UTC datetime of a JD (UTC), rounded to the microsecond."""
    return (_dt.datetime(1970, 1, 1, tzinfo=_dt.timezone.utc)
            + _dt.timedelta(microseconds=round((float(jd) - _UNIX_EPOCH_JD) * 86400e6)))


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
        return jd_to_datetime_utc(self.start_jd)

    def end_utc(self) -> _dt.datetime:
        return jd_to_datetime_utc(self.end_jd)


@dataclass(frozen=True)
class WindowObservability:
    """Observability of time windows, one target per window (arrays of length W).

    ``fraction``: share of the (baseline-padded) window during which every constraint holds,
    sampled every ``step_minutes``. ``in_one_night``: the padded window lies entirely between one
    night's dusk and dawn. ``night_date``: that night (or the night of the window's middle).
    ``min_altitude_deg``: lowest target altitude in the padded window.
    """

    fraction: np.ndarray
    in_one_night: np.ndarray
    night_date: list
    min_altitude_deg: np.ndarray
    step_minutes: float

    @property
    def fully_observable(self) -> np.ndarray:
        return self.in_one_night & (self.fraction >= 1.0)


@dataclass
class _NightEphem:
    grid: NightGrid
    t0: float                  # first coarse time, JD UTC
    step: float                # coarse step, days
    sun: np.ndarray            # (K, 3) apparent geocentric position in CIRS axes, au
    moon: np.ndarray           # (K, 3)
    illum: np.ndarray          # (K,)
    dut1: float                # UT1 - UTC, days
    astrom: np.ndarray = field(repr=False)   # ERFA astrom record for ICRS -> CIRS at mid-night


def _interp_rows(t0, step, table, t):
    """Linear interpolation of rows of ``table`` (K, ...) at times ``t`` on the grid t0 + k step."""
    x = (np.asarray(t) - t0) / step
    k = np.clip(np.floor(x).astype(int), 0, table.shape[0] - 2)
    f = x - k
    if table.ndim == 2:
        f = f[..., None]
    return table[k] * (1.0 - f) + table[k + 1] * f


def _unit(v):
    return v / np.linalg.norm(v, axis=-1, keepdims=True)


def _radec_to_unit(ra_rad, dec_rad):
    c = np.cos(dec_rad)
    return np.stack([c * np.cos(ra_rad), c * np.sin(ra_rad), np.sin(dec_rad)], axis=-1)


class VisibilityEngine:
    """Sun, Moon and target geometry and the site's constraints, vectorised over targets x times.

    Parameters
    ----------
    site : Site
    step_minutes : float
        Resolution of the night grids (:attr:`NightGrid.times_jd`) and of window sampling.
    sunset_altitude_deg : float
        Sun-centre altitude of sunset/sunrise (default -0.8333 deg; use 0 for astroplan's default).
    ephemeris_step_minutes : float
        Coarse grid of the geocentric Moon (and Sun) positions, linearly interpolated in between;
        at 60 min the Moon's direction is good to ~1 arcsec (the topocentric part is exact).
    cache_nights : int
        How many nights of coarse ephemeris to keep (least recently used are dropped).

    Notes
    -----
    Times are JD (UTC) floats. Target arrays are ICRS ra/dec in degrees; results for N targets and
    T times have shape (N, T).
    """

    def __init__(self, site: Site, *, step_minutes: float = 5.0,
                 sunset_altitude_deg: float = SUNSET_ALTITUDE_DEG,
                 ephemeris_step_minutes: float = 60.0, cache_nights: int = 400):
        if not step_minutes > 0:
            raise ValueError(f"step_minutes must be > 0, got {step_minutes}")
        if not 0 < ephemeris_step_minutes <= 60:
            raise ValueError(f"ephemeris_step_minutes must be in (0, 60], got {ephemeris_step_minutes}")
        if cache_nights < 1:
            raise ValueError(f"cache_nights must be >= 1, got {cache_nights}")
        configure_offline()
        self.site = site
        self.step_minutes = float(step_minutes)
        self.sunset_altitude_deg = float(sunset_altitude_deg)
        self.ephemeris_step_minutes = float(ephemeris_step_minutes)
        self.cache_nights = int(cache_nights)
        self._cache: OrderedDict[_dt.date, _NightEphem] = OrderedDict()
        self._tz = site.tzinfo
        self._lat = site.latitude_deg * _DEG
        self._lon = site.longitude_deg * _DEG
        self._n_coarse = int(math.ceil(27.5 * 60.0 / self.ephemeris_step_minutes)) + 1
        x, y, zz = (v.to_value("au") for v in site.location.to_geocentric())
        self._rho_xy, self._geo_z = math.hypot(x, y), zz

    # ------------------------------------------------------------------ nights
    def night(self, date) -> NightGrid:
        """The night starting on the evening of local ``date`` (a date or 'YYYY-MM-DD')."""
        d = _as_date(date)
        return self._ephems([d])[0].grid

    def nights(self, start_date, end_date) -> list[NightGrid]:
        """Nights whose evenings fall on local dates ``start_date`` .. ``end_date`` (inclusive)."""
        a, b = _as_date(start_date), _as_date(end_date)
        if b < a:
            raise ValueError(f"end date {b} is before start date {a}")
        dates = [a + _dt.timedelta(days=i) for i in range((b - a).days + 1)]
        out = []
        for i in range(0, len(dates), self.cache_nights):
            out.extend(e.grid for e in self._ephems(dates[i:i + self.cache_nights]))
        return out

    def coming_night_date(self, now_jd: float | None = None) -> _dt.date:
        """Local date of the night in progress, or of the next one if the current one has ended."""
        if now_jd is None:
            now_jd = datetime_to_jd(_dt.datetime.now(_dt.timezone.utc))
        d = self._night_date_of(now_jd)
        g = self.night(d)
        if g.kind == "no_night" or now_jd >= g.end_jd:
            return d + _dt.timedelta(days=1)
        return d

    def local_time(self, jd: float) -> _dt.datetime:
        """Aware local datetime at the site of a JD (UTC)."""
        return jd_to_datetime_utc(jd).astimezone(self._tz)

    # ------------------------------------------------------------------ geometry
    def sun_altitude(self, times_jd) -> np.ndarray:
        """Geometric altitude (deg) of the Sun's centre at each time (shape of ``times_jd``)."""
        t = np.asarray(times_jd, dtype=float)
        out = np.empty(t.shape)
        for e, idx in self._groups(t.ravel()):
            tt = t.ravel()[idx]
            z, _, _, obs = self._frame(tt, e)
            u = self._body(e, "sun", tt, obs)
            out.ravel()[idx] = np.degrees(np.arcsin(np.clip(np.sum(u * z, axis=-1), -1, 1)))
        return out

    def moon(self, times_jd) -> dict:
        """Moon at each time: ``alt_deg``, ``az_deg`` (geometric, topocentric), ``illumination`` (0-1)."""
        t = np.asarray(times_jd, dtype=float).ravel()
        alt, az, ill = np.empty(t.shape), np.empty(t.shape), np.empty(t.shape)
        for e, idx in self._groups(t):
            tt = t[idx]
            z, east, north, obs = self._frame(tt, e)
            u = self._body(e, "moon", tt, obs)
            alt[idx] = np.degrees(np.arcsin(np.clip(np.sum(u * z, -1), -1, 1)))
            az[idx] = np.degrees(np.arctan2(np.sum(u * east, -1), np.sum(u * north, -1))) % 360.0
            ill[idx] = _interp_rows(e.t0, e.step, e.illum, tt)
        shape = np.shape(times_jd)
        return {"alt_deg": alt.reshape(shape), "az_deg": az.reshape(shape),
                "illumination": ill.reshape(shape)}

    def altaz(self, ra_deg, dec_deg, times_jd) -> tuple[np.ndarray, np.ndarray]:
        """Geometric altitude and azimuth (deg, azimuth N=0 E=90) of N targets at T times: (N, T)."""
        st = self._state(ra_deg, dec_deg, times_jd, want_az=True, want_moon=False)
        return st["alt"], st["az"]

    def altitude(self, ra_deg, dec_deg, times_jd) -> np.ndarray:
        """Geometric altitude (deg) of N targets at T times, shape (N, T)."""
        return self._state(ra_deg, dec_deg, times_jd, want_az=False, want_moon=False)["alt"]

    def airmass(self, ra_deg, dec_deg, times_jd) -> np.ndarray:
        """Plane-parallel airmass sec z, shape (N, T); +inf at or below the horizon."""
        s = np.sin(np.radians(self.altitude(ra_deg, dec_deg, times_jd)))
        with np.errstate(divide="ignore"):
            return np.where(s > 0, 1.0 / np.where(s > 0, s, 1.0), np.inf)

    def moon_separation(self, ra_deg, dec_deg, times_jd) -> np.ndarray:
        """Topocentric angular distance (deg) from the Moon's centre, shape (N, T)."""
        st = self._state(ra_deg, dec_deg, times_jd, want_az=False, want_moon=True)
        return np.degrees(np.arccos(np.clip(st["cos_moon_sep"], -1.0, 1.0)))

    # ------------------------------------------------------------------ constraints
    def observable_mask(self, ra_deg, dec_deg, times_jd) -> np.ndarray:
        """True where every site constraint holds, shape (N targets, T times).

        Constraints: Sun below the twilight limit (strictly), target altitude >= the limit (and
        the horizon mask at its azimuth), Moon separation >= the limit at the Moon's illumination
        (skipped while the Moon is below the horizon if ``moon_ignore_below_horizon``).
        """
        c = self.site.constraints
        st = self._state(ra_deg, dec_deg, times_jd, want_az=bool(c.horizon_mask),
                         want_moon=c.min_moon_separation_deg > 0, want_sun=True,
                         want_alt=bool(c.horizon_mask))
        return self._combine(st)

    def _combine(self, st) -> np.ndarray:
        c = self.site.constraints
        ok = st["sun_alt"][None, :] < c.sun_altitude_limit_deg
        if c.horizon_mask:
            ok = ok & (st["alt"] >= c.required_altitude_deg(st["az"]))
        else:
            ok = ok & (st["sin_alt"] >= math.sin(c.min_altitude_deg * _DEG))
        if c.min_moon_separation_deg > 0:
            need = np.radians(c.required_moon_separation_deg(st["moon_illum"]))
            moon_ok = st["cos_moon_sep"] <= np.cos(need)[None, :]
            if c.moon_ignore_below_horizon:
                moon_ok = moon_ok | (st["moon_alt"] < 0.0)[None, :]
            ok = ok & moon_ok
        return ok

    def window_observability(self, ra_deg, dec_deg, windows_jd, *, baseline_minutes: float = 0.0,
                             step_minutes: float | None = None) -> WindowObservability:
        """Observability of W windows, window i belonging to the target (ra_deg[i], dec_deg[i]).

        Parameters
        ----------
        ra_deg, dec_deg : array (W,)
        windows_jd : array (W, 2)
            [start, end] JD (UTC) of each window (e.g. an occultation from first to last contact).
        baseline_minutes : float
            Out-of-event baseline added before and after each window.
        step_minutes : float, optional
            Sampling step (default: the engine's ``step_minutes``); the window ends are always sampled.
        """
        w = np.atleast_2d(np.asarray(windows_jd, dtype=float))
        ra = np.broadcast_to(np.asarray(ra_deg, dtype=float), (w.shape[0],))
        dec = np.broadcast_to(np.asarray(dec_deg, dtype=float), (w.shape[0],))
        if w.shape[1] != 2 or np.any(~(w[:, 1] >= w[:, 0])):
            raise ValueError("windows_jd must be (W, 2) with end >= start")
        pad = baseline_minutes / 1440.0
        lo, hi = w[:, 0] - pad, w[:, 1] + pad
        step = (step_minutes or self.step_minutes) / 1440.0
        m = int(max(2, np.ceil(np.max(hi - lo, initial=0.0) / step) + 1))
        frac = np.linspace(0.0, 1.0, m)
        times = lo[:, None] + (hi - lo)[:, None] * frac[None, :]          # (W, m)
        st = self._pairs(ra, dec, times)
        ok = st["ok"]
        # equal weights per sample, trapezoid-like: ends count half
        wts = np.ones(m)
        wts[[0, -1]] = 0.5
        fraction = (ok * wts).sum(axis=1) / wts.sum()
        # the night containing the middle of each window
        mid = 0.5 * (lo + hi)
        dates = [self._night_date_of(x) for x in mid]
        grids = {d: self.night(d) for d in set(dates)}
        in_one = np.array([grids[d].kind != "no_night" and lo[i] >= grids[d].start_jd
                           and hi[i] <= grids[d].end_jd for i, d in enumerate(dates)], dtype=bool)
        return WindowObservability(fraction=fraction, in_one_night=in_one, night_date=dates,
                                   min_altitude_deg=st["alt"].min(axis=1),
                                   step_minutes=step * 1440.0)

    def visible_slots(self, ra_deg, dec_deg, night, *, min_duration_minutes: float = 0.0,
                      ) -> list[list[tuple[float, float]]]:
        """Intervals of one night during which each target is observable.

        Returns, per target, a list of (start_jd, end_jd) (UTC): the first and last grid times of
        each run of observable grid samples (``step_minutes`` resolution), keeping runs at least
        ``min_duration_minutes`` long. Every grid sample inside a slot is observable.
        """
        g = night if isinstance(night, NightGrid) else self.night(night)
        t = g.times_jd
        n = np.atleast_1d(np.asarray(ra_deg)).size
        if t.size == 0:
            return [[] for _ in range(n)]
        mask = self.observable_mask(ra_deg, dec_deg, t)
        pad = np.zeros((mask.shape[0], 1), dtype=bool)
        d = np.diff(np.concatenate([pad, mask, pad], axis=1).astype(np.int8), axis=1)
        need = min_duration_minutes / 1440.0 - 1e-9
        out = []
        for i in range(mask.shape[0]):
            starts = np.flatnonzero(d[i] == 1)
            ends = np.flatnonzero(d[i] == -1) - 1
            out.append([(float(t[a]), float(t[b])) for a, b in zip(starts, ends)
                        if t[b] - t[a] >= need])
        return out

    # ------------------------------------------------------------------ internals
    def _night_date_of(self, jd: float) -> _dt.date:
        """Local date D such that local noon of D <= jd < local noon of D+1."""
        d = self.local_time(jd).date()
        if jd < self._noon_jd(d):     # compare JDs, not rounded clock readings
            d -= _dt.timedelta(days=1)
        return d

    def _noon_jd(self, d: _dt.date) -> float:
        return datetime_to_jd(_dt.datetime(d.year, d.month, d.day, 12, tzinfo=self._tz))

    def _frame(self, t, e: _NightEphem):
        """Zenith, east, north unit vectors and the site's geocentric position (au) in CIRS at
        times t (JD UTC, 1-D): four (T, 3) arrays. Polar motion is neglected (< 0.5 arcsec)."""
        import erfa

        L = erfa.era00(t + e.dut1, 0.0) + self._lon
        cl, sl = np.cos(L), np.sin(L)
        cp, sp = math.cos(self._lat), math.sin(self._lat)
        zero = np.zeros_like(L)
        z = np.stack([cp * cl, cp * sl, np.full_like(L, sp)], axis=-1)
        east = np.stack([-sl, cl, zero], axis=-1)
        north = np.stack([-sp * cl, -sp * sl, np.full_like(L, cp)], axis=-1)
        obs = np.stack([self._rho_xy * cl, self._rho_xy * sl, np.full_like(L, self._geo_z)], axis=-1)
        return z, east, north, obs

    def _body(self, e: _NightEphem, which: str, t, obs):
        """Topocentric CIRS unit vector of the Sun or Moon at times t (interpolated geocentric
        position minus the site's position)."""
        table = e.sun if which == "sun" else e.moon
        return _unit(_interp_rows(e.t0, e.step, table, t) - obs)

    def _groups(self, t):
        """Yield (night ephemeris, indices into t) covering every time in ``t`` (1-D)."""
        t = np.asarray(t, dtype=float)
        if t.size == 0:
            return
        if not np.all(np.isfinite(t)):
            raise ValueError("times must be finite JD values")
        d0 = self._night_date_of(float(t.min()))
        d1 = self._night_date_of(float(t.max()))
        dates = [d0 + _dt.timedelta(days=i) for i in range((d1 - d0).days + 1)]
        done = 0
        for i in range(0, len(dates), self.cache_nights):
            chunk = dates[i:i + self.cache_nights]
            ephs = self._ephems(chunk)
            noons = np.array([e.grid.noon_jd for e in ephs] + [ephs[-1].grid.next_noon_jd])
            k = np.searchsorted(noons, t, side="right") - 1
            for j, e in enumerate(ephs):
                idx = np.flatnonzero(k == j)
                if idx.size:
                    done += idx.size
                    yield e, idx
        if done != t.size:   # every time must belong to exactly one night
            raise RuntimeError(f"internal error: {t.size - done} times not assigned to a night")

    def _targets_cirs(self, ra_deg, dec_deg, e: _NightEphem):
        import erfa

        ri, di = erfa.atciq(np.radians(ra_deg), np.radians(dec_deg), 0.0, 0.0, 0.0, 0.0, e.astrom)
        return _radec_to_unit(ri, di)

    def _state(self, ra_deg, dec_deg, times_jd, *, want_az, want_moon, want_sun=False, want_alt=True):
        """Quantities on the (N targets x T times) outer grid."""
        ra = np.atleast_1d(np.asarray(ra_deg, dtype=float)).ravel()
        dec = np.atleast_1d(np.asarray(dec_deg, dtype=float)).ravel()
        if ra.shape != dec.shape:
            raise ValueError(f"ra_deg and dec_deg differ in length: {ra.size} vs {dec.size}")
        if np.any(np.abs(dec) > 90) or not np.all(np.isfinite(ra)) or not np.all(np.isfinite(dec)):
            raise ValueError("target coordinates must be finite with |dec| <= 90 deg")
        t = np.atleast_1d(np.asarray(times_jd, dtype=float)).ravel()
        n, m = ra.size, t.size
        out = {"sin_alt": np.empty((n, m))}
        if want_az:
            out["az"] = np.empty((n, m))
        if want_moon:
            out["cos_moon_sep"] = np.empty((n, m))
            out["moon_alt"] = np.empty(m)
            out["moon_illum"] = np.empty(m)
        if want_sun:
            out["sun_alt"] = np.empty(m)
        for e, idx in self._groups(t):
            tt = t[idx]
            u = self._targets_cirs(ra, dec, e)                    # (N, 3)
            z, east, north, obs = self._frame(tt, e)             # (Tg, 3)
            out["sin_alt"][:, idx] = u @ z.T
            if want_az:
                out["az"][:, idx] = np.degrees(np.arctan2(u @ east.T, u @ north.T)) % 360.0
            if want_sun:
                su = self._body(e, "sun", tt, obs)
                out["sun_alt"][idx] = np.degrees(np.arcsin(np.clip(np.sum(su * z, -1), -1, 1)))
            if want_moon:
                mu = self._body(e, "moon", tt, obs)
                out["cos_moon_sep"][:, idx] = u @ mu.T
                out["moon_alt"][idx] = np.degrees(np.arcsin(np.clip(np.sum(mu * z, -1), -1, 1)))
                out["moon_illum"][idx] = _interp_rows(e.t0, e.step, e.illum, tt)
        if want_alt:
            out["alt"] = np.degrees(np.arcsin(np.clip(out["sin_alt"], -1.0, 1.0)))
        return out

    def _pairs(self, ra, dec, times):
        """Quantities for target i at its own times ``times[i, :]`` (W, m); includes the mask 'ok'."""
        c = self.site.constraints
        w, m = times.shape
        flat_t = times.ravel()
        tid = np.repeat(np.arange(w), m)
        sin_alt = np.empty(flat_t.size)
        az = np.empty(flat_t.size)
        sun_alt = np.empty(flat_t.size)
        cms = np.empty(flat_t.size)
        malt = np.empty(flat_t.size)
        mill = np.empty(flat_t.size)
        for e, idx in self._groups(flat_t):
            tt = flat_t[idx]
            u = self._targets_cirs(ra[tid[idx]], dec[tid[idx]], e)   # (k, 3)
            z, east, north, obs = self._frame(tt, e)
            sin_alt[idx] = np.sum(u * z, -1)
            az[idx] = np.degrees(np.arctan2(np.sum(u * east, -1), np.sum(u * north, -1))) % 360.0
            su = self._body(e, "sun", tt, obs)
            sun_alt[idx] = np.degrees(np.arcsin(np.clip(np.sum(su * z, -1), -1, 1)))
            mu = self._body(e, "moon", tt, obs)
            cms[idx] = np.sum(u * mu, -1)
            malt[idx] = np.degrees(np.arcsin(np.clip(np.sum(mu * z, -1), -1, 1)))
            mill[idx] = _interp_rows(e.t0, e.step, e.illum, tt)
        alt = np.degrees(np.arcsin(np.clip(sin_alt, -1, 1)))
        ok = (sun_alt < c.sun_altitude_limit_deg) & (alt >= c.required_altitude_deg(az))
        if c.min_moon_separation_deg > 0:
            moon_ok = cms <= np.cos(np.radians(c.required_moon_separation_deg(mill)))
            if c.moon_ignore_below_horizon:
                moon_ok |= malt < 0.0
            ok &= moon_ok
        return {"alt": alt.reshape(w, m), "ok": ok.reshape(w, m)}

    def _ephems(self, dates: list[_dt.date]) -> list[_NightEphem]:
        missing = [d for d in dict.fromkeys(dates) if d not in self._cache]
        if missing:
            for d, e in zip(missing, self._compute(missing)):
                self._cache[d] = e
        out = []
        for d in dates:
            self._cache.move_to_end(d)
            out.append(self._cache[d])
        while len(self._cache) > self.cache_nights:
            self._cache.popitem(last=False)
        return out

    def _compute(self, dates: list[_dt.date]) -> list[_NightEphem]:
        """Coarse Sun/Moon ephemeris and Sun events for several nights in one batch of ERFA calls."""
        import erfa
        from astropy.time import Time

        noons = np.array([self._noon_jd(d) for d in dates])
        next_noons = np.array([self._noon_jd(d + _dt.timedelta(days=1)) for d in dates])
        n, k = len(dates), self._n_coarse
        step = self.ephemeris_step_minutes / 1440.0
        t0 = noons - 1.0 / 24.0
        grid = t0[:, None] + step * np.arange(k)[None, :]                  # (n, K) JD UTC
        mids = 0.5 * (noons + next_noons)
        notice_if_beyond_tables(float(grid.max()), stacklevel=5)
        with astropy_quietly():
            tm = Time(mids, format="jd", scale="utc")
            dut1 = np.asarray(tm.delta_ut1_utc, dtype=float) / 86400.0
            tmt = tm.tt
            tt_minus_utc = (tmt.jd1 - tm.jd1) + (tmt.jd2 - tm.jd2)               # days, per night
            c2i = erfa.c2i06a(tmt.jd1, tmt.jd2)                                 # (n, 3, 3)
            astrom, _eo = erfa.apci13(tmt.jd1, tmt.jd2)
            tt = grid + tt_minus_utc[:, None]
            # the Sun moves 0.25 deg in 6 h: evaluate the (costly) Earth ephemeris every ~6 h only
            sub = np.unique(np.r_[np.arange(0, k, max(1, round(360 / self.ephemeris_step_minutes))), k - 1])
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

        ephs = [_NightEphem(grid=None, t0=float(t0[i]), step=step, sun=sun_c[i], moon=moon_c[i],
                            illum=illum[i], dut1=float(dut1[i]), astrom=astrom[i])
                for i in range(n)]
        events = self._sun_events(ephs, noons, next_noons)
        for i, (e, d) in enumerate(zip(ephs, dates)):
            ev = events[i]
            e.grid = NightGrid(date=d, noon_jd=float(noons[i]), next_noon_jd=float(next_noons[i]),
                               sunset_jd=ev["set"], sunrise_jd=ev["rise"], dusk_jd=ev["dusk"],
                               dawn_jd=ev["dawn"], twilight=self.site.constraints.twilight,
                               kind=ev["kind"], step_minutes=self.step_minutes,
                               moon_illumination=float(_interp_rows(e.t0, e.step, e.illum,
                                                                    np.array([mids[i]]))[0]))
        return ephs

    def _sun_events(self, ephs, noons, next_noons):
        """Evening (first downward) and morning (last upward) crossings of the sunset and twilight
        altitudes between local noon and the next local noon: bracketed on a 5-min grid, then
        refined by bisection, vectorised over nights (5 min / 2^16 < 0.01 s)."""
        n = len(ephs)
        sun_all = np.stack([e.sun for e in ephs])
        t0 = np.array([e.t0 for e in ephs])
        dut1 = np.array([e.dut1 for e in ephs])
        step = ephs[0].step

        def sun_alt(t):   # t (n, m) -> (n, m) degrees
            x = (t - t0[:, None]) / step
            k = np.clip(np.floor(x).astype(int), 0, sun_all.shape[1] - 2)
            f = (x - k)[..., None]
            rows = np.arange(n)[:, None]
            z, obs = self._zenith(t + dut1[:, None])
            u = _unit(sun_all[rows, k] * (1.0 - f) + sun_all[rows, k + 1] * f - obs)
            return np.degrees(np.arcsin(np.clip(np.sum(u * z, -1), -1, 1)))

        s = _SEARCH_STEP_MIN / 1440.0
        m = int(np.ceil(np.max(next_noons - noons) / s)) + 1
        tgrid = np.minimum(noons[:, None] + s * np.arange(m)[None, :], next_noons[:, None])
        alt = sun_alt(tgrid)
        res = [dict() for _ in range(n)]
        rows = np.arange(n)
        for (ev, mo), lev in ((("set", "rise"), self.sunset_altitude_deg),
                              (("dusk", "dawn"), self.site.constraints.sun_altitude_limit_deg)):
            above = alt >= lev
            down = above[:, :-1] & ~above[:, 1:]
            up = ~above[:, :-1] & above[:, 1:]
            for key, hits, falling in ((ev, down, True), (mo, up, False)):
                has = hits.any(1)
                j = np.argmax(hits, 1) if falling else m - 2 - np.argmax(hits[:, ::-1], 1)
                lo, hi = tgrid[rows, j], tgrid[rows, j + 1]
                for _ in range(16):
                    mid = 0.5 * (lo + hi)
                    a = sun_alt(mid[:, None])[:, 0] >= lev
                    move_lo = a == falling
                    lo = np.where(move_lo, mid, lo)
                    hi = np.where(move_lo, hi, mid)
                # step 1 s to the dark side of the crossing (the Sun moves ~10 arcsec/s there), so
                # the night's first and last grid times are dark by this engine's test and by
                # astropy's too (they agree to ~1 arcsec)
                val = np.where(has, hi + _EDGE_MARGIN if falling else lo - _EDGE_MARGIN, np.nan)
                for i in range(n):
                    res[i][key] = float(val[i])
            if ev == "dusk":
                for i in range(n):
                    if np.all(above[i]):
                        kind = "no_night"
                    elif np.all(~above[i]):
                        kind = "dark_all_day"
                    elif not (np.isfinite(res[i]["dusk"]) and np.isfinite(res[i]["dawn"])):
                        # the Sun is below the limit at one of the noons (high latitude)
                        kind = "dark_all_day" if not above[i, 0] else "no_night"
                    else:
                        kind = "normal"
                    res[i]["kind"] = kind
        return res

    def _zenith(self, t_ut1):
        """Site zenith unit vector and geocentric position (au) in CIRS at UT1 JD times (any shape)."""
        import erfa

        L = erfa.era00(t_ut1, 0.0) + self._lon
        cp, sp = math.cos(self._lat), math.sin(self._lat)
        cl, sl = np.cos(L), np.sin(L)
        z = np.stack([cp * cl, cp * sl, np.full(np.shape(L), sp)], axis=-1)
        obs = np.stack([self._rho_xy * cl, self._rho_xy * sl, np.full(np.shape(L), self._geo_z)], -1)
        return z, obs


def _as_date(d) -> _dt.date:
    if isinstance(d, _dt.datetime):
        return d.date()
    if isinstance(d, _dt.date):
        return d
    if isinstance(d, str):
        try:
            return _dt.date.fromisoformat(d.strip())
        except ValueError:
            raise ValueError(f"not a date (YYYY-MM-DD): {d!r}") from None
    raise TypeError(f"expected a date or 'YYYY-MM-DD', got {type(d).__name__}")
