"""Fast visibility: Sun, Moon and targets over many nights, vectorised over targets x times.

Times are plain floats, **JD in the UTC scale**, everywhere in this package.

* :mod:`~rhofollow.planning.visibility.ephemeris`: the per-night coarse Sun and Moon ephemerides,
  the site's rotating frame, and the Sun events (sunset, dusk, dawn, sunrise) that bound a night;
  :class:`NightGrid` and the JD <-> datetime helpers.
* :mod:`~rhofollow.planning.visibility.engine`: :class:`VisibilityEngine`, which caches those
  ephemerides per night and answers altitude, azimuth, airmass, Moon separation and the site's
  constraints for N targets x T times, and :class:`WindowObservability` for time windows.
"""
from rhofollow.planning.visibility.engine import VisibilityEngine, WindowObservability
from rhofollow.planning.visibility.ephemeris import (SUNSET_ALTITUDE_DEG, NightGrid, datetime_to_jd,
                                                     jd_to_datetime_utc)

__all__ = ["NightGrid", "VisibilityEngine", "WindowObservability", "jd_to_datetime_utc",
           "datetime_to_jd", "SUNSET_ALTITUDE_DEG"]
