"""Write the invented demo RV files of the Heliotrope Transit Survey (HTS-104, HTS-107).

The orbits below are made up for the demo scenario. If the demo catalogue's period or transit
epoch of a target changes, edit ORBITS and run ``python examples/rv/make_demo_rv.py``.
"""
from pathlib import Path

import numpy as np

from rhofollow.physics.rv import rv_curve

#: name -> period (d), mid-transit epoch (BJD_TDB), e, omega (deg), K (m/s), gamma (m/s),
#: per-epoch error (m/s), jitter (m/s), number of epochs, first night (BJD_TDB)
ORBITS = {
    # the demo catalogue's ephemerides and the invented truths of examples/hts_truth.csv
    "HTS-104": (8.774, 2461028.37097, 0.41, 110.0, 45.0, -12_431.0, 2.4, 2.5, 14, 2461045.6),
    "HTS-107": (16.02, 2461026.59207, 0.35, 40.0, 30.0, 8_215.0, 1.9, 1.8, 12, 2461046.7),
}


def main(out_dir: Path = Path(__file__).parent, seed: int = 104107) -> None:
    rng = np.random.default_rng(seed)
    for name, (p, t0, e, om, k, gamma, err, jit, n, start) in ORBITS.items():
        # One visit on about every third night, at a random time within a 6-hour night.
        nights = np.sort(rng.choice(np.arange(90), n, replace=False))
        t = start + nights + 0.25 * rng.random(n)
        v = rv_curve(t, p, t0, e, np.radians(om), k, gamma)
        v = v + np.hypot(err, jit) * rng.standard_normal(n)
        lines = ["# Invented demo RVs (Heliotrope Transit Survey scenario); written by make_demo_rv.py",
                 "bjd_tdb,rv_ms,rv_err_ms,instrument"]
        lines += [f"{ti:.5f},{vi:.2f},{err:.2f},AQ-VEL" for ti, vi in zip(t, v)]
        (out_dir / f"{name}.csv").write_text("\n".join(lines) + "\n")


if __name__ == "__main__":
    main()
