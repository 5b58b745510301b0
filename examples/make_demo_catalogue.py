"""Generate the invented demo catalogue examples/hts_candidates.csv (Heliotrope Transit Survey).

Every star and planet here is invented. Each candidate is made by a forward model with a known truth
(circular, eccentric, ambiguous, blended, or orbiting a companion star), and the catalogue values are
the noisy "measurements" of that truth, so the demo exercises every branch of the assessment.
Run: python examples/make_demo_catalogue.py  (deterministic: fixed seed).
The truths are written to examples/hts_truth.csv for checking.
"""
from __future__ import annotations

import csv
import math
from pathlib import Path

import numpy as np

from rhofollow.physics.stars import rho_from_mass_radius
from rhofollow.physics.transit import ars_from_rho, eccentric_durations, rho_from_ars

HERE = Path(__file__).parent
rng = np.random.default_rng(7021)

# name, kind, P[d], e, omega[deg], b, k, Mstar, Rstar, Teff, [Fe/H], route_transit, route_star, extra
CASES = [
    ("HTS-101", "circular", 3.418, 0.0, 90, 0.21, 0.105, 1.02, 1.01, 5810, 0.05, "dur", "rho", {}),
    ("HTS-102", "circular", 5.927, 0.0, 90, 0.45, 0.082, 0.91, 0.88, 5420, -0.10, "ars", "mr", {}),
    ("HTS-103", "eccentric", 12.31, 0.52, 75, 0.30, 0.095, 1.10, 1.15, 6050, 0.12, "dur", "rho", {}),
    ("HTS-104", "eccentric", 8.774, 0.41, 110, 0.15, 0.118, 0.98, 0.97, 5690, 0.00, "dur", "mr", {}),
    ("HTS-105", "circular", 2.106, 0.0, 90, 0.62, 0.071, 0.82, 0.79, 5090, -0.22, "dur", "logg", {}),
    ("HTS-106", "eccentric", 21.45, 0.63, 250, 0.40, 0.088, 1.21, 1.38, 6240, 0.18, "dur", "torres", {}),
    ("HTS-107", "eccentric", 16.02, 0.35, 40, 0.25, 0.102, 1.05, 1.08, 5920, 0.08, "ars", "rho", {}),
    ("HTS-108", "ambiguous", 9.613, 0.12, 200, 0.35, 0.066, 0.95, 0.93, 5600, -0.05, "dur", "torres", {}),
    ("HTS-109", "blend", 4.552, 0.0, 90, 0.28, 0.110, 1.00, 1.00, 5780, 0.00, "dur", "rho", {"dilution": 2.6}),
    ("HTS-110", "circular", 7.081, 0.0, 90, 0.05, 0.059, 1.12, 1.25, 6150, 0.20, "rhoc", "mr", {}),
    ("HTS-111", "other_host", 3.902, 0.0, 90, 0.20, 0.160, 1.03, 1.05, 5850, 0.0, "dur", "rho",
     {"host_rho": rho_from_mass_radius(0.45, 0.43), "flux_frac": 0.12}),
    ("HTS-112", "eccentric", 33.80, 0.71, 95, 0.22, 0.092, 1.00, 1.03, 5830, 0.02, "dur", "rho", {}),
    ("HTS-113", "circular", 1.742, 0.0, 90, 0.33, 0.121, 1.18, 1.22, 6300, 0.10, "dur", "mr", {}),
    ("HTS-114", "ambiguous", 14.77, 0.20, 130, 0.55, 0.074, 0.88, 0.86, 5300, -0.15, "ars", "logg", {}),
    ("HTS-115", "eccentric", 6.320, 0.28, 300, 0.18, 0.099, 1.07, 1.10, 5990, 0.05, "dur", "torres", {}),
    ("HTS-116", "blend", 10.44, 0.0, 90, 0.40, 0.090, 0.97, 0.95, 5650, -0.02, "dur", "mr", {"dilution": 1.8}),
    ("HTS-117", "circular", 25.10, 0.0, 90, 0.10, 0.085, 1.01, 1.02, 5760, 0.00, "dur", "rho", {}),
    ("HTS-118", "known_orbit", 11.25, 0.45, 60, 0.28, 0.097, 1.04, 1.06, 5870, 0.06, "dur", "mr",
     {"known": (0.45, 0.04, 60.0, 8.0)}),
    ("HTS-119", "eccentric", 4.871, 0.22, 100, 0.42, 0.140, 0.78, 0.76, 4900, -0.30, "dur", "logg", {}),
    ("HTS-120", "circular", 2.960, 0.0, 90, 0.50, 0.095, 1.30, 1.60, 6400, 0.25, "ars", "torres", {}),
    ("HTS-121", "other_host", 6.615, 0.0, 90, 0.15, 0.070, 0.95, 0.92, 5600, 0.1, "dur", "rho",
     {"host_rho": rho_from_mass_radius(1.40, 2.30), "flux_frac": 0.35}),
    ("HTS-122", "ambiguous", 18.90, 0.15, 20, 0.30, 0.082, 1.00, 1.00, 5800, 0.00, "dur", "mr", {}),
    ("HTS-123", "eccentric", 27.35, 0.55, 180, 0.12, 0.105, 1.15, 1.20, 6100, 0.15, "dur", "rho", {}),
    ("HTS-124", "circular", 8.210, 0.0, 90, 0.38, 0.062, 0.92, 0.90, 5500, -0.08, "dur", "torres", {}),
    ("HTS-125", "eccentric", 3.655, 0.30, 90, 0.25, 0.112, 0.96, 0.95, 5700, 0.03, "dur", "mr", {}),
]

COLUMNS = ["name", "ra_deg", "dec_deg", "vmag", "period_d", "period_d_err", "t0_bjd", "t0_bjd_err",
           "t14_h", "t14_h_err", "t23_h", "t23_h_err", "depth_ppm", "depth_ppm_err", "a_rs", "a_rs_err",
           "b", "b_err", "rp_rs", "rp_rs_err", "rho_circ_cgs", "rho_circ_cgs_errlo", "rho_circ_cgs_errhi",
           "rho_star_cgs", "rho_star_cgs_err", "mstar_msun", "mstar_msun_err", "rstar_rsun",
           "rstar_rsun_err", "logg_cgs", "logg_cgs_err", "teff_k", "teff_k_err", "feh_dex", "feh_dex_err",
           "ecc", "ecc_err", "omega_deg", "omega_deg_err", "companion_rho_cgs", "companion_rho_cgs_err",
           "companion_flux_frac"]


def noisy(x, frac):
    return float(x * (1 + frac * rng.standard_normal())), float(abs(x) * frac)


def main():
    rows, truths = [], []
    for i, (name, kind, P, e, wdeg, b, k, M, R, teff, feh, rt, rs, extra) in enumerate(CASES):
        w = math.radians(wdeg)
        rho_true = float(rho_from_mass_radius(M, R))
        rho_host = extra.get("host_rho", rho_true)
        dil = extra.get("dilution", 1.0)
        if "flux_frac" in extra:
            dil = 1.0 / extra["flux_frac"]
        a_rs = float(ars_from_rho(rho_host, P))
        t14, t23 = (float(x) * 24 for x in eccentric_durations(a_rs, b, k, P, e, w))
        depth = k * k / dil * 1e6
        # invented sky positions spread so that the demo site sees a mix in the southern summer
        ra = float((35 + 23.3 * i + 9 * rng.random()) % 360)
        dec = float(-75 + 80 * rng.random())
        row = {c: "" for c in COLUMNS}
        row.update(name=name, ra_deg=f"{ra:.5f}", dec_deg=f"{dec:.5f}",
                   vmag=f"{9.0 + 4.0 * rng.random():.2f}",
                   period_d=f"{P:.6f}", period_d_err=f"{2e-5 * P:.2g}",
                   t0_bjd=f"{2461020.0 + 40 * rng.random():.5f}", t0_bjd_err=f"{0.0008 + 0.002 * rng.random():.4f}")
        if rt == "dur":
            use_t23 = t23 > 0 and b >= 0.25
            for _ in range(100):  # measurement noise that keeps the durations self-consistent
                v14, s14 = noisy(t14, 0.008)
                v23, s23 = noisy(t23, 0.012) if use_t23 else (0.0, 0.0)
                vd, sd = noisy(depth, 0.02)
                kk = math.sqrt(vd * 1e-6)
                r = (v23 / v14) ** 2
                if not use_t23 or ((1 - kk) ** 2 - r * (1 + kk) ** 2) / (1 - r) > 0.01:
                    break
            row.update(t14_h=f"{v14:.4f}", t14_h_err=f"{s14:.3g}", depth_ppm=f"{vd:.1f}",
                       depth_ppm_err=f"{sd:.3g}")
            if use_t23:
                row.update(t23_h=f"{v23:.4f}", t23_h_err=f"{s23:.3g}")
            else:
                v, s = noisy(b, 0.1)
                row.update(b=f"{abs(v):.3f}", b_err="0.08")
        else:
            # a circular-orbit fit returns a/R* inflated by g (photo-eccentric effect, Kipping 2010)
            g = (1 + e * math.sin(w)) / math.sqrt(1 - e * e)
            a_fit = a_rs * g * dil ** -0.25
            if rt == "ars":
                v, s = noisy(a_fit, 0.03)
                row.update(a_rs=f"{v:.3f}", a_rs_err=f"{s:.3g}", b=f"{b:.2f}", b_err="0.07")
            else:
                rc = float(rho_from_ars(a_fit, P))
                v, s = noisy(rc, 0.09)
                row.update(rho_circ_cgs=f"{v:.4f}", rho_circ_cgs_errlo=f"{0.8 * s:.3g}",
                           rho_circ_cgs_errhi=f"{1.2 * s:.3g}")
            v, s = noisy(k / math.sqrt(dil), 0.015)
            row.update(rp_rs=f"{v:.5f}", rp_rs_err=f"{s:.3g}")
        logg = math.log10(27420.0 * M / R**2)  # cgs, solar surface gravity 27420 cm/s^2 (IAU nominal)
        row.update(teff_k=f"{teff + 60 * rng.standard_normal():.0f}", teff_k_err="80")
        if rs == "rho":
            v, s = noisy(rho_true, 0.05)
            row.update(rho_star_cgs=f"{v:.4f}", rho_star_cgs_err=f"{s:.3g}",
                       mstar_msun=f"{M * (1 + 0.04 * rng.standard_normal()):.3f}", mstar_msun_err=f"{0.05 * M:.3f}")
        elif rs == "mr":
            v, s = noisy(M, 0.04)
            row.update(mstar_msun=f"{v:.3f}", mstar_msun_err=f"{s:.3g}")
            v, s = noisy(R, 0.025)
            row.update(rstar_rsun=f"{v:.3f}", rstar_rsun_err=f"{s:.3g}")
        elif rs == "logg":
            row.update(logg_cgs=f"{logg + 0.03 * rng.standard_normal():.3f}", logg_cgs_err="0.04")
            v, s = noisy(R, 0.03)
            row.update(rstar_rsun=f"{v:.3f}", rstar_rsun_err=f"{s:.3g}")
        else:
            row.update(logg_cgs=f"{logg + 0.05 * rng.standard_normal():.3f}", logg_cgs_err="0.08",
                       feh_dex=f"{feh + 0.05 * rng.standard_normal():.2f}", feh_dex_err="0.08")
        if "known" in extra:
            ke, kee, kw, kwe = extra["known"]
            row.update(ecc=f"{ke}", ecc_err=f"{kee}", omega_deg=f"{kw}", omega_deg_err=f"{kwe}")
        if "host_rho" in extra:
            row.update(companion_rho_cgs=f"{extra['host_rho']:.3f}",
                       companion_rho_cgs_err=f"{0.15 * extra['host_rho']:.3f}",
                       companion_flux_frac=f"{extra['flux_frac']}")
        rows.append(row)
        truths.append({"name": name, "kind": kind, "ecc": e, "omega_deg": wdeg, "b": b, "k": k,
                       "rho_star_true": round(rho_true, 4), "rho_host": round(rho_host, 4),
                       "dilution": round(dil, 3)})
    with open(HERE / "hts_candidates.csv", "w", newline="") as fh:
        wr = csv.DictWriter(fh, COLUMNS)
        wr.writeheader()
        wr.writerows(rows)
    with open(HERE / "hts_truth.csv", "w", newline="") as fh:
        wr = csv.DictWriter(fh, list(truths[0]))
        wr.writeheader()
        wr.writerows(truths)


if __name__ == "__main__":
    main()
