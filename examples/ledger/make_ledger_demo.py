"""Generate the invented ledger demo files in examples/ledger/ (Heliotrope Transit Survey).

Every number is invented. The RVs and the occultation timing are simulated from the demo truths in
examples/hts_truth.csv with the ephemerides of examples/hts_candidates.csv, so that
``rhofollow log update`` on the demo catalogue moves the posteriors toward those truths:

* HTS-103 (eccentric): 14 RVs on two invented spectrographs and one caught occultation;
* HTS-101 (circular): 8 RVs and one window, away from phase 0.5, where nothing was seen.

Run: python examples/ledger/make_ledger_demo.py  (deterministic: fixed seed). The light-travel
delay of the occultation (under a minute here) is left out of the simulated timing.
"""
from __future__ import annotations

import csv
from pathlib import Path

import numpy as np

from rhofollow.physics.kepler import transit_to_occultation_time
from rhofollow.physics.rv import rv_curve

HERE = Path(__file__).parent
EXAMPLES = HERE.parent
rng = np.random.default_rng(50712)

INSTRUMENTS = {"Larkspur": (3.0, 11.5), "Foxglove": (5.0, -4.0)}  # name: (error m/s, offset m/s)
K_MS = {"HTS-101": 95.0, "HTS-103": 45.0}
N_RV = {"HTS-101": {"Larkspur": 8}, "HTS-103": {"Larkspur": 10, "Foxglove": 4}}


def rows_of(path: Path) -> dict[str, dict]:
    with open(path, newline="", encoding="utf-8") as fh:
        return {r["name"]: r for r in csv.DictReader(fh)}


def main() -> None:
    cat = rows_of(EXAMPLES / "hts_candidates.csv")
    truth = rows_of(EXAMPLES / "hts_truth.csv")
    rv_lines = []
    start = 2461060.5
    for name, per_inst in N_RV.items():
        p, t0 = float(cat[name]["period_d"]), float(cat[name]["t0_bjd"])
        e, om = float(truth[name]["ecc"]), np.radians(float(truth[name]["omega_deg"]))
        for inst, n in per_inst.items():
            err, offset = INSTRUMENTS[inst]
            t = np.sort(start + rng.uniform(0.0, 60.0, n))
            v = rv_curve(t, p, t0, e, om, K_MS[name], offset) + rng.normal(0.0, err, n)
            rv_lines += [(name, f"{ti:.5f}", f"{vi:.2f}", f"{err:.1f}", inst) for ti, vi in zip(t, v)]
    rv_lines.sort(key=lambda r: (r[0], r[1]))
    with open(HERE / "rv_heliotrope.csv", "w", newline="", encoding="utf-8") as fh:
        fh.write("# Invented demo data (examples/ledger/make_ledger_demo.py): Heliotrope Transit "
                 "Survey RVs\n")
        w = csv.writer(fh, lineterminator="\n")
        w.writerow(["target", "bjd_tdb", "rv_ms", "rv_err_ms", "instrument"])
        w.writerows(rv_lines)

    # HTS-103: the occultation caught 9 orbits after the catalogue epoch, 4.5 min timing error
    p, t0 = float(cat["HTS-103"]["period_d"]), float(cat["HTS-103"]["t0_bjd"])
    e, om = float(truth["HTS-103"]["ecc"]), np.radians(float(truth["HTS-103"]["omega_deg"]))
    mid = t0 + 9 * p + transit_to_occultation_time(p, e, om) + rng.normal(0.0, 4.5 / 1440)
    # HTS-101 (circular): nothing seen at phase 0.30-0.36 of orbit 12 (the occultation is at 0.5)
    p1, t1 = float(cat["HTS-101"]["period_d"]), float(cat["HTS-101"]["t0_bjd"])
    ws, we = t1 + (12 + 0.30) * p1, t1 + (12 + 0.36) * p1
    with open(HERE / "occultations_heliotrope.csv", "w", newline="", encoding="utf-8") as fh:
        fh.write("# Invented demo data (examples/ledger/make_ledger_demo.py): one caught "
                 "occultation, one window with nothing seen\n")
        w = csv.writer(fh, lineterminator="\n")
        w.writerow(["target", "kind", "mid_bjd_tdb", "mid_err_min", "window_start_bjd_tdb",
                    "window_end_bjd_tdb", "depth_limit_ppm", "band_um", "instrument"])
        w.writerow(["HTS-103", "detection", f"{mid:.5f}", "4.5", "", "", "", "4.5", "Sorrel-IR"])
        w.writerow(["HTS-101", "non_detection", "", "", f"{ws:.5f}", f"{we:.5f}", "350", "3.6",
                    "Sorrel-IR"])


if __name__ == "__main__":
    main()
