"""Offline time handling: astropy's Earth-orientation tables from the installed packages only.

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

from rhofollow.errors import RhofollowWarning

__all__ = ["OfflineTablesWarning", "configure_offline", "iers_table_end_jd", "notice_if_beyond_tables",
           "astropy_quietly", "reset_notice"]


class OfflineTablesWarning(RhofollowWarning):
    """Dates lie beyond the installed Earth-orientation tables; accuracy is degraded, not lost."""


_LOCK = threading.Lock()
_STATE = {"configured": False, "table_end_jd": None, "notice_given": False}


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
    """Last date (JD, UTC) covered by the installed Earth-orientation table."""
    configure_offline()
    return _STATE["table_end_jd"]


def notice_if_beyond_tables(jd_max: float, *, stacklevel: int = 3) -> bool:
    """Give the one-per-run notice if ``jd_max`` (JD UTC) is past the installed tables.

    Returns True if the date is beyond the tables (whether or not the notice was already given).
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
        warnings.warn(
            f"dates after {last} are beyond the installed Earth-orientation tables "
            "(astropy-iers-data); UT1-UTC and polar motion are extrapolated, so times and "
            "altitudes are good to ~1 s and ~15 arcsec. Upgrade astropy-iers-data for full "
            "accuracy. (This notice is shown once per run.)",
            OfflineTablesWarning, stacklevel=stacklevel)
    return True


def reset_notice() -> None:
    """Forget that the notice was given (for tests and long-lived sessions)."""
    with _LOCK:
        _STATE["notice_given"] = False


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
