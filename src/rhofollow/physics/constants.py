"""Physical constants used by the numerical core (plain floats, SI unless named otherwise).

Sources
-------
IAU 2015 Resolution B3 nominal values (Prša et al. 2016, AJ 152, 41): R_sun, GM_sun, GM_earth,
GM_jup, R_earth (equatorial), R_jup (equatorial), Teff_sun. CODATA 2018: G. Exact SI: c, h, k_B.
Masses are derived as GM/G, so they carry G's relative uncertainty (2.2e-5).
"""

G_SI = 6.67430e-11            # m^3 kg^-1 s^-2 (CODATA 2018)
C_SI = 299792458.0            # m s^-1 (exact)
H_SI = 6.62607015e-34         # J s (exact)
KB_SI = 1.380649e-23          # J K^-1 (exact)
SIGMA_SB = 5.670374419e-8     # W m^-2 K^-4 (CODATA 2018)

R_SUN_M = 6.957e8             # m, IAU 2015 nominal
GM_SUN_SI = 1.3271244e20      # m^3 s^-2, IAU 2015 nominal
TEFF_SUN_K = 5772.0           # K, IAU 2015 nominal
R_EARTH_M = 6.3781e6          # m, IAU 2015 nominal equatorial
GM_EARTH_SI = 3.986004e14     # m^3 s^-2, IAU 2015 nominal
R_JUP_M = 7.1492e7            # m, IAU 2015 nominal equatorial
GM_JUP_SI = 1.2668653e17      # m^3 s^-2, IAU 2015 nominal

M_SUN_KG = GM_SUN_SI / G_SI
M_EARTH_KG = GM_EARTH_SI / G_SI
M_JUP_KG = GM_JUP_SI / G_SI

AU_M = 149597870700.0         # m (IAU 2012, exact)
DAY_S = 86400.0
YEAR_D = 365.25               # Julian year in days

#: Mean solar density in g/cm^3 from the nominal values: 3 M / (4 pi R^3).
RHO_SUN_CGS = 3.0 * M_SUN_KG / (4.0 * 3.141592653589793 * R_SUN_M**3) * 1e-3

__all__ = [n for n in dir() if n.isupper()]
