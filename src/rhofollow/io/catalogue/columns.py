"""The catalogue's column table: canonical names with units, errors, required columns and accepted ranges."""
from __future__ import annotations

import os
import re
from dataclasses import dataclass
import astropy.units as u

from rhofollow.errors import InputError


class CatalogueError(InputError, ValueError):
    """The catalogue file as a whole cannot be used (missing, unreadable, no rows, no name column).

    ``str(exc)`` is one sentence that names the file.
    """

    def __init__(self, source: str | os.PathLike, reason: str):
        self.source = str(source)
        self.reason = reason
        super().__init__(f"{self.source}: {reason}", file=self.source)


# ---------------------------------------------------------------------------------------------
# Column specification
# ---------------------------------------------------------------------------------------------

#: Parts per million, defined locally (not registered in astropy's global unit registry).
PPM = u.def_unit("ppm", 1e-6 * u.dimensionless_unscaled)
_PPT = u.def_unit("ppt", 1e-3 * u.dimensionless_unscaled)
_LOCAL_UNITS = {"ppm": PPM, "ppt": _PPT}
_LOGG_UNIT = u.dex(u.cm / u.s**2)


@dataclass(frozen=True)
class ColumnSpec:
    """A canonical catalogue column: its name, the name without unit suffix, and its unit.

    ``unit`` is None for pure numbers (a/R*, b, Rp/R*, e, fractions).
    """

    name: str
    stem: str
    unit: u.UnitBase | None
    description: str


def _spec(name, unit, description, stem=None):
    if stem is None:
        stem = name.rsplit("_", 1)[0] if unit is not None else name
    return ColumnSpec(name, stem, unit, description)


_GCC = u.g / u.cm**3

#: The numeric catalogue columns (``name`` is the one text column), in DESIGN.md order.
COLUMNS: dict[str, ColumnSpec] = {c.name: c for c in [
    _spec("period_d", u.d, "orbital period"),
    _spec("t0_bjd", u.d, "mid-transit epoch, BJD_TDB"),
    _spec("ra_deg", u.deg, "right ascension (ICRS)"),
    _spec("dec_deg", u.deg, "declination (ICRS)"),
    _spec("a_rs", None, "scaled semi-major axis a/R* from a circular-orbit fit"),
    _spec("b", None, "impact parameter"),
    _spec("rp_rs", None, "radius ratio Rp/R*"),
    _spec("t14_h", u.h, "total transit duration T14"),
    _spec("t23_h", u.h, "full transit duration T23"),
    _spec("depth_ppm", PPM, "transit depth"),
    _spec("rho_circ_cgs", _GCC, "circular-orbit stellar density"),
    _spec("rho_star_cgs", _GCC, "independent stellar density"),
    _spec("mstar_msun", u.M_sun, "stellar mass"),
    _spec("rstar_rsun", u.R_sun, "stellar radius"),
    _spec("logg_cgs", _LOGG_UNIT, "stellar surface gravity log10(g / cm s^-2)"),
    _spec("teff_k", u.K, "stellar effective temperature"),
    _spec("feh_dex", u.dex, "stellar metallicity [Fe/H]"),
    _spec("vmag", u.mag, "V magnitude"),
    _spec("ecc", None, "known orbital eccentricity"),
    _spec("omega_deg", u.deg, "known argument of periastron (RV convention)"),
    _spec("mp_mearth", u.M_earth, "known planet mass"),
    _spec("contam_frac", None, "known fraction of third light in the aperture"),
    _spec("companion_rho_cgs", _GCC, "density of a possible other host star"),
    _spec("companion_flux_frac", None, "flux fraction of the possible other host star"),
    _spec("jitter_ms", u.m / u.s, "expected RV jitter"),
]}

#: Stems that may appear without a unit and then mean the suffix's (universal) convention.
_UNITLESS_STEM_OK = {"logg", "teff", "feh"}
_ERR_SUFFIXES = ("_errlo", "_errhi", "_err")

REQUIRED = ("period_d", "t0_bjd")
COORDS = ("ra_deg", "dec_deg")

#: Extension (lower case) -> astropy reader format ("csv" is read by this module).
SUPPORTED_EXTENSIONS = {".csv": "csv", ".ecsv": "ascii.ecsv", ".vot": "votable",
                        ".xml": "votable", ".votable": "votable"}

# Guard bands for warnings (row kept). Chosen ranges, common practice, no source.
TORRES_TEFF_RANGE = (4300.0, 10000.0)   # Torres et al. 2010 calibrated on stars above ~0.6 M_sun
_EXTREME = {
    "period_d": (0.1, 1000.0),
    "rho_star_cgs": (1e-3, 150.0),
    "rho_circ_cgs": (1e-3, 150.0),
    "mstar_msun": (0.08, 5.0),
    "rstar_rsun": (0.08, 20.0),
    "logg_cgs": (2.0, 5.5),
    "feh_dex": (-2.5, 1.0),
    "vmag": (-1.5, 20.0),
    "rp_rs": (0.0, 0.3),
}
_T0_RANGE = (2.0e6, 2.8e6)   # a full BJD (2,000,000 is 811 BC; 2,800,000 is AD 2953)

#: Physical ranges (canonical units): a value outside is a row error (``README.md`` lists them
#: with the reasons). Generous on purpose: brown-dwarf hosts to giants, periods from hours to about
#: a century. Each entry: (low, high, low_inclusive, high_inclusive, where the limit comes from).
_RHO_MAX = 1000.0      # g/cm^3: densest brown dwarfs ~250 (0.075 M_sun in 0.075 R_sun); white dwarfs out of scope
_RHO_MIN = 1.0e-6      # g/cm^3: a 1 M_sun giant of 100 R_sun has 1.4e-6
PHYSICAL_RANGES: dict[str, tuple[float, float, bool, bool, str]] = {
    "period_d": (0.004, 36525.0, True, True,
                 "low: P at a/R* = 1 around a 1000 g/cm^3 host, P = sqrt(3 pi / (G rho)) (Kepler's third "
                 "law); high: 100 years, longer than any transit survey can phase (common practice, no source)"),
    "a_rs": (1.0, 1.0e5, False, True,
             "low: the orbit must lie outside the star; high: a/R* = (G rho P^2 / 3 pi)^(1/3) = 4e4 for "
             "1000 g/cm^3 at 100 years (Kepler's third law)"),
    "b": (0.0, 2.0, True, True, "a transit needs b < 1 + Rp/R* <= 2 (geometry)"),
    "rp_rs": (1.0e-4, 1.0, True, False,
              "low: depth (Rp/R*)^2 = 0.01 ppm, far below any photometric precision; high: the "
              "occulter must be smaller than the star (common practice, no source)"),
    "depth_ppm": (0.01, 1.0e6, True, False, "as rp_rs: 0.01 ppm to a full eclipse"),
    "t14_h": (0.01, 2.0e4, True, True,
              "low: 36 s; high: T14 ~ P (1 + k) / (pi a/R*) = 1.4e4 h at 100 years around a "
              "1e-6 g/cm^3 giant (circular-orbit duration)"),
    "t23_h": (0.001, 2.0e4, True, True,
              "low: 3.6 s, below any photometric cadence (a shorter flat bottom is a grazing "
              "transit: leave t23_h out); high: as t14_h"),
    "rho_circ_cgs": (1.0e-9, 1.0e6, True, True,
                     "the stellar range widened by ((1 + e sin w) / sqrt(1 - e^2))^3 for e up to "
                     "0.99 (Kipping 2010 photo-eccentric factor) and by blends"),
    "rho_star_cgs": (_RHO_MIN, _RHO_MAX, True, True,
                     "1e-6 (a 100 R_sun giant) to 1000 g/cm^3 (above the densest brown dwarfs)"),
    "companion_rho_cgs": (_RHO_MIN, _RHO_MAX, True, True, "as rho_star_cgs"),
    "mstar_msun": (0.01, 150.0, True, True,
                   "the deuterium-burning limit (~13 Jupiter masses) to the most massive stars"),
    "rstar_rsun": (0.04, 1000.0, True, True,
                   "below the smallest brown dwarfs (~0.08 R_sun) to red supergiants"),
    "logg_cgs": (-1.0, 7.0, True, True,
                 "supergiants (log g ~ 0) to above old brown dwarfs (~5.5), below white dwarfs (~8) "
                 "(common practice, no source)"),
    "teff_k": (250.0, 60000.0, True, True, "the coolest Y dwarfs to O stars (common practice, no source)"),
    "feh_dex": (-5.0, 1.5, True, True,
                "the most metal-poor known stars to the most metal-rich (common practice, no source)"),
    "vmag": (-2.0, 30.0, True, True, "brighter than Sirius (-1.46) to beyond any telescope's RV reach"),
    "omega_deg": (-360.0, 720.0, True, True, "an angle more than a turn outside [0, 360) is a typo"),
    "mp_mearth": (1.0e-3, 3.0e4, True, True,
                  "a tenth of the Moon's mass to the hydrogen-burning limit (~80 Jupiter masses)"),
    "jitter_ms": (0.0, 1000.0, True, True,
                  "pulsating giants reach hundreds of m/s (common practice, no source)"),
}
#: Largest 1-sigma error accepted per column: the width of its physical range (an error larger
#: than the whole range says nothing and overflows the draws). t0_bjd: one longest period.
_ERROR_MAX = {c: hi - lo for c, (lo, hi, *_r) in PHYSICAL_RANGES.items()}
_ERROR_MAX.update({"t0_bjd": 36525.0, "ra_deg": 360.0, "dec_deg": 180.0, "ecc": 1.0,
                   "contam_frac": 1.0, "companion_flux_frac": 1.0})

#: Characters refused in target names: C0 and C1 control characters (NUL, tab, CR, LF, ...),
#: DEL, and the Unicode line and paragraph separators; they break files, tables and terminals.
_CONTROL = re.compile("[\x00-\x1f\x7f-\x9f\u2028\u2029]")
