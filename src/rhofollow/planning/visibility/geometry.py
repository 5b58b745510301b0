"""The visibility engine's internals: the per-night ephemeris cache and the vectorised geometry.

:class:`NightGeometry` is the base of :class:`~rhofollow.planning.visibility.engine.VisibilityEngine`
(which sets up the attributes used here: ``site``, ``step_minutes``, ``sunset_altitude_deg``,
``ephemeris_step_minutes``, ``cache_nights``, ``_cache``, ``_tz``, ``_n_coarse``, ``_site_frame``).
It finds the night of each time, computes and caches each night's coarse ephemeris
(:func:`~rhofollow.planning.visibility.ephemeris.compute_nights`) and evaluates target, Sun and Moon
directions on (targets x times) grids (:meth:`NightGeometry._state`) or per window
(:meth:`NightGeometry._pairs`). Times are JD (UTC) floats; angles in degrees unless named ``sin_``
or ``cos_``.
"""
from __future__ import annotations

import datetime as _dt

import numpy as np

from rhofollow.planning.visibility.ephemeris import (NightEphemeris, compute_nights, datetime_to_jd,
                                                     interp_rows, jd_to_datetime_utc)
from rhofollow.planning.visibility.frame import radec_to_unit, unit_vectors

__all__ = ["NightGeometry"]


class NightGeometry:
    """Night lookup, the LRU cache of night ephemerides and the vectorised geometry (no public API).

    The attributes are set by the subclass's constructor
    (:class:`~rhofollow.planning.visibility.engine.VisibilityEngine`); see the module docstring.
    """

    def _night_date_of(self, jd: float) -> _dt.date:
        """Local date D such that local noon of D <= jd < local noon of D+1."""
        d = jd_to_datetime_utc(jd).astimezone(self._tz).date()
        if jd < self._noon_jd(d):     # compare JDs, not rounded clock readings
            d -= _dt.timedelta(days=1)
        return d

    def _noon_jd(self, d: _dt.date) -> float:
        return datetime_to_jd(_dt.datetime(d.year, d.month, d.day, 12, tzinfo=self._tz))

    def _frame(self, t, e: NightEphemeris):
        """Zenith, east, north unit vectors and the site's geocentric position (au) in CIRS at
        times t (JD UTC, 1-D): four (T, 3) arrays. Polar motion is neglected (< 0.5 arcsec)."""
        return self._site_frame.frame(t, e.dut1)

    def _body(self, e: NightEphemeris, which: str, t, obs):
        """Topocentric CIRS unit vector of the Sun or Moon at times t (interpolated geocentric
        position minus the site's position)."""
        table = e.sun if which == "sun" else e.moon
        return unit_vectors(interp_rows(e.t0, e.step, table, t) - obs)

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

    def _targets_cirs(self, ra_deg, dec_deg, e: NightEphemeris):
        import erfa

        ri, di = erfa.atciq(np.radians(ra_deg), np.radians(dec_deg), 0.0, 0.0, 0.0, 0.0, e.astrom)
        return radec_to_unit(ri, di)

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
                out["moon_illum"][idx] = interp_rows(e.t0, e.step, e.illum, tt)
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
            mill[idx] = interp_rows(e.t0, e.step, e.illum, tt)
        alt = np.degrees(np.arcsin(np.clip(sin_alt, -1, 1)))
        ok = (sun_alt < c.sun_altitude_limit_deg) & (alt >= c.required_altitude_deg(az))
        if c.min_moon_separation_deg > 0:
            moon_ok = cms <= np.cos(np.radians(c.required_moon_separation_deg(mill)))
            if c.moon_ignore_below_horizon:
                moon_ok |= malt < 0.0
            ok &= moon_ok
        return {"alt": alt.reshape(w, m), "ok": ok.reshape(w, m)}

    def _ephems(self, dates: list[_dt.date]) -> list[NightEphemeris]:
        missing = [d for d in dict.fromkeys(dates) if d not in self._cache]
        if missing:
            noons = np.array([self._noon_jd(d) for d in missing])
            next_noons = np.array([self._noon_jd(d + _dt.timedelta(days=1)) for d in missing])
            c = self.site.constraints
            computed = compute_nights(
                self._site_frame, missing, noons, next_noons, n_coarse=self._n_coarse,
                ephemeris_step_minutes=self.ephemeris_step_minutes, step_minutes=self.step_minutes,
                sunset_altitude_deg=self.sunset_altitude_deg,
                twilight_altitude_deg=c.sun_altitude_limit_deg, twilight=c.twilight)
            for d, e in zip(missing, computed):
                self._cache[d] = e
        out = []
        for d in dates:
            self._cache.move_to_end(d)
            out.append(self._cache[d])
        while len(self._cache) > self.cache_nights:
            self._cache.popitem(last=False)
        return out
