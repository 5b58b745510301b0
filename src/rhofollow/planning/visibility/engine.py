"""The visibility engine: Sun, Moon and targets over many nights, vectorised over targets x times.

Times are plain floats: **JD in the UTC scale** everywhere (inputs, outputs and
:class:`~rhofollow.planning.visibility.ephemeris.NightGrid`). Altitudes are geometric (no
refraction), like astropy's ``AltAz`` with pressure 0 and astroplan's default ``Observer``.

The heavy geometry comes once per night from :mod:`rhofollow.planning.visibility.ephemeris`; the
rest is linear algebra. Targets: ICRS (ra, dec) -> CIRS once per night with ERFA ``atciq``
(precession, nutation, frame bias, annual aberration, light deflection) at the night's middle (the
change over a night is < 0.1 arcsec). The site's geocentric position is subtracted from the Sun
and Moon at each requested time (exact diurnal parallax, about 1 deg for the Moon). Then
sin(alt) = u . Z and az = atan2(u . E, u . N): one (targets x 3) @ (3 x times) product per
quantity.

Caching: each night's coarse ephemeris and boundaries live in a bounded LRU cache owned by the
:class:`VisibilityEngine` instance, keyed by the local date of the evening. No module-level state.
"""
from __future__ import annotations

import datetime as _dt
import math
from collections import OrderedDict
from dataclasses import dataclass

import numpy as np

from rhofollow.core.timescales import configure_offline
from rhofollow.planning.site import Site
from rhofollow.planning.visibility.ephemeris import (SUNSET_ALTITUDE_DEG, NightEphemeris, NightGrid,
                                                     datetime_to_jd, interp_rows, jd_to_datetime_utc)
from rhofollow.planning.visibility.frame import SiteFrame
from rhofollow.planning.visibility.geometry import NightGeometry

__all__ = ["VisibilityEngine", "WindowObservability"]

_DEG = math.pi / 180.0


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
        """True where the padded window lies in one night and is observable throughout."""
        return self.in_one_night & (self.fraction >= 1.0)


class VisibilityEngine(NightGeometry):
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
        self._cache: OrderedDict[_dt.date, NightEphemeris] = OrderedDict()
        self._tz = site.tzinfo
        self._n_coarse = int(math.ceil(27.5 * 60.0 / self.ephemeris_step_minutes)) + 1
        x, y, zz = (v.to_value("au") for v in site.location.to_geocentric())
        self._site_frame = SiteFrame(lat=site.latitude_deg * _DEG, lon=site.longitude_deg * _DEG,
                                     rho_xy=math.hypot(x, y), geo_z=zz)

    # ------------------------------------------------------------------ nights
    def night(self, date) -> NightGrid:
        """The night starting on the evening of a local date.

        Parameters
        ----------
        date : datetime.date or str
            Local date of the evening ('YYYY-MM-DD').

        Returns
        -------
        NightGrid
            The night's limits and grid (JD, UTC).
        """
        d = _as_date(date)
        return self._ephems([d])[0].grid

    def nights(self, start_date, end_date) -> list[NightGrid]:
        """Nights whose evenings fall on local dates ``start_date`` .. ``end_date`` (inclusive).

        Parameters
        ----------
        start_date, end_date : datetime.date or str
            First and last local evening dates ('YYYY-MM-DD').

        Returns
        -------
        list of NightGrid
            One per date, in date order (JD, UTC).
        """
        a, b = _as_date(start_date), _as_date(end_date)
        if b < a:
            raise ValueError(f"end date {b} is before start date {a}")
        dates = [a + _dt.timedelta(days=i) for i in range((b - a).days + 1)]
        out = []
        for i in range(0, len(dates), self.cache_nights):
            out.extend(e.grid for e in self._ephems(dates[i:i + self.cache_nights]))
        return out

    def coming_night_date(self, now_jd: float | None = None) -> _dt.date:
        """Local date of the night in progress, or of the next one if the current one has ended.

        Parameters
        ----------
        now_jd : float or None
            The time (JD, UTC); None for the computer's clock.

        Returns
        -------
        datetime.date
            Local date of that night's evening.
        """
        if now_jd is None:
            now_jd = datetime_to_jd(_dt.datetime.now(_dt.timezone.utc))
        d = self._night_date_of(now_jd)
        g = self.night(d)
        if g.kind == "no_night" or now_jd >= g.end_jd:
            return d + _dt.timedelta(days=1)
        return d

    def local_time(self, jd: float) -> _dt.datetime:
        """Local time at the site.

        Parameters
        ----------
        jd : float
            Time (JD, UTC).

        Returns
        -------
        datetime.datetime
            Aware datetime in the site's time zone.
        """
        return jd_to_datetime_utc(jd).astimezone(self._tz)

    # ------------------------------------------------------------------ geometry
    def sun_altitude(self, times_jd) -> np.ndarray:
        """Geometric altitude of the Sun's centre at each time.

        Parameters
        ----------
        times_jd : float or array
            Times (JD, UTC).

        Returns
        -------
        ndarray
            Altitude (degrees), shaped like ``times_jd``.
        """
        t = np.asarray(times_jd, dtype=float)
        out = np.empty(t.shape)
        for e, idx in self._groups(t.ravel()):
            tt = t.ravel()[idx]
            z, _, _, obs = self._frame(tt, e)
            u = self._body(e, "sun", tt, obs)
            out.ravel()[idx] = np.degrees(np.arcsin(np.clip(np.sum(u * z, axis=-1), -1, 1)))
        return out

    def moon(self, times_jd) -> dict:
        """The Moon at each time, topocentric and geometric.

        Parameters
        ----------
        times_jd : float or array
            Times (JD, UTC).

        Returns
        -------
        dict
            ``alt_deg``, ``az_deg`` (degrees, azimuth N = 0, E = 90) and ``illumination``
            (illuminated fraction, 0-1), each shaped like ``times_jd``.
        """
        t = np.asarray(times_jd, dtype=float).ravel()
        alt, az, ill = np.empty(t.shape), np.empty(t.shape), np.empty(t.shape)
        for e, idx in self._groups(t):
            tt = t[idx]
            z, east, north, obs = self._frame(tt, e)
            u = self._body(e, "moon", tt, obs)
            alt[idx] = np.degrees(np.arcsin(np.clip(np.sum(u * z, -1), -1, 1)))
            az[idx] = np.degrees(np.arctan2(np.sum(u * east, -1), np.sum(u * north, -1))) % 360.0
            ill[idx] = interp_rows(e.t0, e.step, e.illum, tt)
        shape = np.shape(times_jd)
        return {"alt_deg": alt.reshape(shape), "az_deg": az.reshape(shape),
                "illumination": ill.reshape(shape)}

    def altaz(self, ra_deg, dec_deg, times_jd) -> tuple[np.ndarray, np.ndarray]:
        """Geometric altitude and azimuth of N targets at T times.

        Parameters
        ----------
        ra_deg, dec_deg : float or array (N,)
            Target coordinates (ICRS, degrees).
        times_jd : float or array (T,)
            Times (JD, UTC).

        Returns
        -------
        alt, az : ndarray (N, T)
            Altitude and azimuth (degrees, azimuth N = 0, E = 90).
        """
        st = self._state(ra_deg, dec_deg, times_jd, want_az=True, want_moon=False)
        return st["alt"], st["az"]

    def altitude(self, ra_deg, dec_deg, times_jd) -> np.ndarray:
        """Geometric altitude of N targets at T times.

        Parameters
        ----------
        ra_deg, dec_deg : float or array (N,)
            Target coordinates (ICRS, degrees).
        times_jd : float or array (T,)
            Times (JD, UTC).

        Returns
        -------
        ndarray (N, T)
            Altitude (degrees).
        """
        return self._state(ra_deg, dec_deg, times_jd, want_az=False, want_moon=False)["alt"]

    def airmass(self, ra_deg, dec_deg, times_jd) -> np.ndarray:
        """Plane-parallel airmass sec z of N targets at T times.

        Parameters
        ----------
        ra_deg, dec_deg : float or array (N,)
            Target coordinates (ICRS, degrees).
        times_jd : float or array (T,)
            Times (JD, UTC).

        Returns
        -------
        ndarray (N, T)
            Airmass (dimensionless); +inf at or below the horizon.
        """
        s = np.sin(np.radians(self.altitude(ra_deg, dec_deg, times_jd)))
        with np.errstate(divide="ignore"):
            return np.where(s > 0, 1.0 / np.where(s > 0, s, 1.0), np.inf)

    def moon_separation(self, ra_deg, dec_deg, times_jd) -> np.ndarray:
        """Topocentric angular distance of N targets from the Moon's centre at T times.

        Parameters
        ----------
        ra_deg, dec_deg : float or array (N,)
            Target coordinates (ICRS, degrees).
        times_jd : float or array (T,)
            Times (JD, UTC).

        Returns
        -------
        ndarray (N, T)
            Separation (degrees).
        """
        st = self._state(ra_deg, dec_deg, times_jd, want_az=False, want_moon=True)
        return np.degrees(np.arccos(np.clip(st["cos_moon_sep"], -1.0, 1.0)))

    # ------------------------------------------------------------------ constraints
    def observable_mask(self, ra_deg, dec_deg, times_jd) -> np.ndarray:
        """True where every site constraint holds, shape (N targets, T times).

        Constraints: Sun below the twilight limit (strictly), target altitude >= the limit (and
        the horizon mask at its azimuth), Moon separation >= the limit at the Moon's illumination
        (skipped while the Moon is below the horizon if ``moon_ignore_below_horizon``).

        Parameters
        ----------
        ra_deg, dec_deg : float or array (N,)
            Target coordinates (ICRS, degrees).
        times_jd : float or array (T,)
            Times (JD, UTC).

        Returns
        -------
        ndarray of bool (N, T)
            Observable or not.
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
            Target of each window (ICRS, degrees).
        windows_jd : array (W, 2)
            [start, end] JD (UTC) of each window (e.g. an occultation from first to last contact).
        baseline_minutes : float
            Out-of-event baseline added before and after each window.
        step_minutes : float, optional
            Sampling step (default: the engine's ``step_minutes``); the window ends are always sampled.

        Returns
        -------
        WindowObservability
            Observable fraction (0-1), whether each padded window lies in one night, that night's
            date and the lowest altitude (degrees).
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

        Parameters
        ----------
        ra_deg, dec_deg : float or array (N,)
            Target coordinates (ICRS, degrees).
        night : NightGrid, datetime.date or str
            The night, or the local date of its evening.
        min_duration_minutes : float
            Shortest slot kept (minutes).

        Returns
        -------
        list of list of (start_jd, end_jd)
            Per target, the first and last grid times (JD, UTC) of each run of observable grid
            samples (``step_minutes`` resolution) at least ``min_duration_minutes`` long. Every
            grid sample inside a slot is observable.
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
