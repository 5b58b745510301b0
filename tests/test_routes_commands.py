"""Every documented route through every command (issue 10, "every route the README lists works end to end").

README's Usage section and ``io/catalogue.py`` document the transit routes (``a_rs`` [+ ``b`` + ``rp_rs``];
``t14_h`` with ``t23_h`` or ``b`` and ``depth_ppm`` or ``rp_rs``; ``rho_circ_cgs`` [+ a radius ratio]; several
in one row) and the star routes (``rho_star_cgs``; ``mstar_msun`` + ``rstar_rsun``; ``logg_cgs`` +
``rstar_rsun``; ``teff_k`` + ``logg_cgs`` + ``feh_dex``; several in one row). One invented row per transit
route x star route goes into ONE catalogue; each command runs once on it, and every (command, route pair)
is a test of its own that reads that command's JSON.

check, assess and eclipses run every route pair (9 x 5 = 45 rows). rv, night, campaign and plan repeat the
RV stage's simulated tests per target (about half a CPU second each), so by default they run a covering
set: every transit route once, every star route at least once, including both rows with neither a radius
ratio nor a mass route (a_rs | rho_star and rho_circ | rho_star, the issue's seen case); with
RHOFOLLOW_TEST_ALL_ROUTES=1 they run all 45 rows too.

The rows are invented (host stars "RT-nn" near the demo site's zenith in December) and built from a
circular orbit with a chosen density ratio q = rho_circ / rho*: 1 (circular), 2.2 and 0.55 (eccentric).
"""
from __future__ import annotations

import csv
import itertools
import json
import math
import os
from dataclasses import replace
from pathlib import Path

import pytest

from rhofollow.cli import main

ROOT = Path(__file__).resolve().parents[1]
SITE = str(ROOT / "site_configs" / "alto_quemado.toml")
VEL = str(ROOT / "site_configs" / "instruments" / "aq_vel.toml")
SEED = ["--seed", "11"]
SAMPLES = ["--samples", "500"]          # the smallest the commands accept
DATES = ["--start", "2026-12-10", "--end", "2026-12-12"]

# IAU 2015 nominal values (Prsa et al. 2016, Resolution B3) and CODATA 2018 G: the rows' geometry.
G_SI = 6.67430e-11
GM_SUN = 1.3271244e20
R_SUN = 6.957e8
RHO_SUN_CGS = (GM_SUN / G_SI) / (4.0 / 3.0 * math.pi * R_SUN**3) * 1e-3
DAY_S = 86400.0

#: transit route -> the columns it gives (README Usage; io/catalogue.py's geometry-route test)
TRANSIT_ROUTES = {
    "a_rs+b+rp_rs": ("a_rs", "b", "rp_rs"),
    "a_rs": ("a_rs",),
    "t14+t23+depth": ("t14_h", "t23_h", "depth_ppm"),
    "t14+t23+rp_rs": ("t14_h", "t23_h", "rp_rs"),
    "t14+b+depth": ("t14_h", "b", "depth_ppm"),
    "t14+b+rp_rs": ("t14_h", "b", "rp_rs"),
    "rho_circ": ("rho_circ_cgs",),
    "rho_circ+depth": ("rho_circ_cgs", "depth_ppm"),
    "a_rs+t14+t23+depth": ("a_rs", "t14_h", "t23_h", "depth_ppm"),
}
#: star route -> the columns it gives
STAR_ROUTES = {
    "rho_star": ("rho_star_cgs",),
    "mass+radius": ("mstar_msun", "rstar_rsun"),
    "logg+radius": ("logg_cgs", "rstar_rsun", "teff_k"),
    "teff+logg+feh": ("teff_k", "logg_cgs", "feh_dex"),
    "rho_star+mass+radius": ("rho_star_cgs", "mstar_msun", "rstar_rsun", "teff_k"),
}
#: what assess names as the route it used (record keys route_transit / route_star)
TRANSIT_LABEL = {"a_rs": "a/R* and P", "rho_circ": "given rho_circ", "durations": "durations"}
STAR_LABEL = {"rho_star": "given rho*", "mass+radius": "M* and R*", "logg+radius": "log g and R*",
              "teff+logg+feh": "Teff, log g, [Fe/H]", "rho_star+mass+radius": "given rho*"}
RATIOS = (1.0, 2.2, 0.55)
# relative 1-sigma errors given in the rows (absolute for b, log g, Teff, [Fe/H])
REL_ERR = {"a_rs": 0.03, "rp_rs": 0.01, "t14_h": 0.01, "t23_h": 0.015, "depth_ppm": 0.02, "rho_circ_cgs": 0.08,
           "rho_star_cgs": 0.06, "mstar_msun": 0.05, "rstar_rsun": 0.03}
ABS_ERR = {"b": 0.05, "logg_cgs": 0.05, "teff_k": 80.0, "feh_dex": 0.08}
COLUMNS = ["name", "ra_deg", "dec_deg", "vmag", "period_d", "period_d_err", "t0_bjd", "t0_bjd_err"] + [
    c for col in list(REL_ERR) + list(ABS_ERR) for c in (col, col + "_err")]


def _a_rs(rho_cgs: float, period_d: float) -> float:
    """a/R* from Kepler's third law, rho = 3 pi (a/R*)^3 / (G P^2) (Seager & Mallen-Ornelas 2003; eq. 9, number
    value from memory)."""
    return (G_SI * rho_cgs * 1e3 * (period_d * DAY_S) ** 2 / (3 * math.pi)) ** (1 / 3)


def _durations_h(a_rs: float, b: float, k: float, period_d: float) -> tuple[float, float]:
    """Circular-orbit T14 and T23 in hours (Seager & Mallen-Ornelas 2003; eqs. 1-3, numbers value from memory)."""
    sin_i = math.sqrt(1 - (b / a_rs) ** 2)
    t14 = period_d / math.pi * math.asin(math.sqrt((1 + k) ** 2 - b * b) / (a_rs * sin_i))
    t23 = period_d / math.pi * math.asin(math.sqrt((1 - k) ** 2 - b * b) / (a_rs * sin_i))
    return 24 * t14, 24 * t23


# the invented host: M = 1.02 M_sun, R = 0.98 R_sun (rho* = 1.53 g/cm^3), Teff 5850 K, [Fe/H] +0.05
MSTAR, RSTAR = 1.02, 0.98
RHO_STAR = MSTAR / RSTAR**3 * RHO_SUN_CGS
LOGG = math.log10(GM_SUN * MSTAR / (RSTAR * R_SUN) ** 2 * 100)   # g in cm/s^2
K_RATIO, B = 0.1, 0.3


def _route_rows():
    """(name, transit route, star route, density ratio q, CSV row) for every route pair."""
    rows = []
    for i, (tr, sr) in enumerate(itertools.product(TRANSIT_ROUTES, STAR_ROUTES)):
        p = 3.1 + 0.23 * i
        q = RATIOS[i % 3]
        a = _a_rs(RHO_STAR * q, p)
        t14, t23 = _durations_h(a, B, K_RATIO, p)
        values = {"a_rs": a, "b": B, "rp_rs": K_RATIO, "t14_h": t14, "t23_h": t23, "depth_ppm": 1e6 * K_RATIO**2,
                  "rho_circ_cgs": RHO_STAR * q, "rho_star_cgs": RHO_STAR, "mstar_msun": MSTAR,
                  "rstar_rsun": RSTAR, "logg_cgs": LOGG, "teff_k": 5850.0, "feh_dex": 0.05}
        name = f"RT-{i + 1:02d}"
        row = {"name": name, "ra_deg": f"{40 + 1.9 * i:.3f}", "dec_deg": f"{-22 - 0.4 * i:.3f}", "vmag": "10.5",
               "period_d": f"{p:.6f}", "period_d_err": "1e-5", "t0_bjd": f"{2461000.5 + 0.37 * i:.5f}",
               "t0_bjd_err": "0.001"}
        for col in TRANSIT_ROUTES[tr] + STAR_ROUTES[sr]:
            row[col] = f"{values[col]:.7g}"
            err = REL_ERR[col] * values[col] if col in REL_ERR else ABS_ERR[col]
            row[col + "_err"] = f"{err:.4g}"
        rows.append((name, tr, sr, q, row))
    return rows


ROUTE_ROWS = _route_rows()
PAIRS = [pytest.param(name, tr, sr, q, id=f"{tr}|{sr}") for name, tr, sr, q, _row in ROUTE_ROWS]


def _covering_rows():
    """Transit route i with star route (i - 6) mod 5: every route appears, rho_circ meets rho_star."""
    stars = list(STAR_ROUTES)
    pick = {(tr, stars[(i - 6) % len(stars)]) for i, tr in enumerate(TRANSIT_ROUTES)}
    return [r for r in ROUTE_ROWS if (r[1], r[2]) in pick]


ALL_ROUTES_DOWNSTREAM = os.environ.get("RHOFOLLOW_TEST_ALL_ROUTES", "") not in ("", "0")
DOWNSTREAM_ROWS = ROUTE_ROWS if ALL_ROUTES_DOWNSTREAM else _covering_rows()
DOWNSTREAM_PAIRS = [pytest.param(name, tr, sr, q, id=f"{tr}|{sr}") for name, tr, sr, q, _row in DOWNSTREAM_ROWS]
DOWNSTREAM = ("rv", "night", "campaign", "plan")


def _has_radius_ratio(tr: str) -> bool:
    return any(c in TRANSIT_ROUTES[tr] for c in ("rp_rs", "depth_ppm"))


def _write_csv(path: Path, rows, columns=COLUMNS) -> Path:
    with open(path, "w", newline="", encoding="utf-8") as fh:
        w = csv.DictWriter(fh, columns)
        w.writeheader()
        for r in rows:
            w.writerow(r)
    return path


def _finite(x) -> bool:
    return isinstance(x, (int, float)) and not isinstance(x, bool) and math.isfinite(x)


def _quantiles_ok(q: dict, lo=-math.inf, hi=math.inf) -> bool:
    """A quantile object: all five finite, ordered, inside [lo, hi]."""
    vals = [q[k] for k in ("q025", "q16", "q50", "q84", "q975")]
    return all(_finite(v) for v in vals) and vals == sorted(vals) and lo <= vals[0] and vals[-1] <= hi


def _by_name(doc: dict) -> dict:
    return {t["name"]: t for t in doc["targets"]}


# ------------------------------------------------------------------ one run per command (module scope)

@pytest.fixture(scope="module")
def catalogues(tmp_path_factory) -> dict[str, Path]:
    """The full route catalogue and the one the RV-stage commands run."""
    folder = tmp_path_factory.mktemp("routes")
    return {"all": _write_csv(folder / "routes.csv", [r[-1] for r in ROUTE_ROWS]),
            "downstream": _write_csv(folder / "routes_downstream.csv", [r[-1] for r in DOWNSTREAM_ROWS])}


@pytest.fixture(scope="module")
def cheap_rv_tests():
    """night and campaign have no --sims option (default 2000 simulated null sets per RV test); the test
    run uses 100, as `rv --sims 100` and `plan --sims 100` do here. Runtime only: the code path is the same."""
    from rhofollow import pipeline

    mp = pytest.MonkeyPatch()
    original = pipeline.PipelineOptions
    mp.setattr(pipeline, "PipelineOptions", lambda **kw: replace(original(**kw), sims=100))
    yield
    mp.undo()


def _run(argv, json_path: Path | None) -> dict:
    rc = main(argv)
    doc = json.loads(json_path.read_text()) if json_path is not None else {}
    doc["_rc"] = rc
    return doc


@pytest.fixture(scope="module")
def outputs(catalogues, tmp_path_factory, cheap_rv_tests):
    """Each command's JSON, computed on first use (one run per command for all its route pairs)."""
    out = tmp_path_factory.mktemp("outputs")
    cat, down = str(catalogues["all"]), str(catalogues["downstream"])
    argv = {
        "check": ["check", cat, "--site", SITE, "--require-coords"],
        "assess": ["assess", cat, *SAMPLES, *SEED],
        "eclipses": ["eclipses", cat, *DATES, *SAMPLES, *SEED],
        "rv": ["rv", down, "--instrument", VEL, *SAMPLES, "--sims", "100", *SEED],
        "night": ["night", down, "--site", SITE, "--date", "2026-12-10", *SAMPLES, *SEED],
        "campaign": ["campaign", down, "--site", SITE, *DATES, *SAMPLES, *SEED],
    }
    cache: dict[str, dict] = {}

    def get(command: str) -> dict:
        if command not in cache:
            if command == "plan":
                folder = out / "plan"
                rc = main(["plan", down, "--site", SITE, *DATES, "--out", str(folder), *SAMPLES, "--sims", "100",
                           "--plot-targets", "1", *SEED])
                cache[command] = dict(json.loads((folder / "results.json").read_text()), _rc=rc,
                                      _night=json.loads((folder / "night.json").read_text()))
            else:
                path = out / f"{command}.json"
                cache[command] = _run(argv[command] + ["--json", str(path)], path)
        return cache[command]

    return get


COMMANDS = ("check", "assess", "eclipses", "rv", "night", "campaign", "plan")


@pytest.mark.parametrize("command", COMMANDS)
def test_every_route_pair_runs_clean(outputs, command):
    # exit status 0: every row valid and every target ok (README, "Output contract")
    doc = outputs(command)
    assert doc["_rc"] == 0 and doc["exit_status"] == 0
    assert doc["n_row_errors"] == 0 and doc["n_targets_failed"] == 0
    rows = DOWNSTREAM_ROWS if command in DOWNSTREAM else ROUTE_ROWS
    assert sorted(t["name"] for t in doc["targets"]) == sorted(r[0] for r in rows)


def test_covering_set_meets_every_route():
    # the RV-stage commands' rows use every transit route and every star route
    assert {r[1] for r in DOWNSTREAM_ROWS} == set(TRANSIT_ROUTES)
    assert {r[2] for r in DOWNSTREAM_ROWS} == set(STAR_ROUTES)
    assert {("rho_circ", "rho_star"), ("a_rs", "rho_star")} <= {(r[1], r[2]) for r in DOWNSTREAM_ROWS}


# ------------------------------------------------------------------ per route pair, per command

@pytest.mark.parametrize("name, tr, sr, q", PAIRS)
def test_check(outputs, name, tr, sr, q):
    doc = outputs("check")
    row = {r["name"]: r for r in doc["rows"]}[name]
    assert row["ok"] and row["errors"] == []
    t = _by_name(doc)[name]
    assert not t["never_rises"]          # dec -22 to -40 from latitude -30.4: near the zenith


@pytest.mark.parametrize("name, tr, sr, q", PAIRS)
def test_assess(outputs, name, tr, sr, q):
    r = _by_name(outputs("assess"))[name]
    assert r["ok"] and r["errors"] == []
    # the route the row offers is the one used
    kind = "durations" if "t14_h" in TRANSIT_ROUTES[tr] else ("a_rs" if "a_rs" in TRANSIT_ROUTES[tr] else "rho_circ")
    assert r["route_transit"].startswith(TRANSIT_LABEL[kind]), r["route_transit"]
    assert r["route_star"].startswith(STAR_LABEL[sr]), r["route_star"]
    # a radius ratio is optional on the density routes: a documented default, with a warning
    assert r["radius_ratio_assumed"] is (not _has_radius_ratio(tr))
    assert any("no radius ratio" in w for w in r["warnings"]) is (not _has_radius_ratio(tr))
    # densities: finite, and their ratio is the one the row was built with (Kepler's third law /
    # Seager & Mallen-Ornelas 2003 exact circular durations; 3-8 % errors in the row, so 20 % holds)
    for key in ("rho_circ_cgs", "rho_star_cgs", "density_ratio"):
        assert _quantiles_ok(r[key], lo=0.0), key
    assert r["density_ratio"]["q50"] == pytest.approx(q, rel=0.2)
    # ecc_min = |Q - 1| / (Q + 1), Q = ratio^(2/3) (README "Photo-eccentric effect"; Kipping 2010)
    big_q = r["density_ratio"]["q50"] ** (2 / 3)
    assert r["ecc_min"] == pytest.approx(abs(big_q - 1) / (big_q + 1), abs=1e-9)
    # the posterior: e in [0, 1), omega finite, probabilities in [0, 1], a positive sample size
    assert _quantiles_ok(r["ecc"], 0.0, 0.999999)
    assert _quantiles_ok(r["omega_deg"])
    assert 0.0 <= r["p_ecc_gt_0p1"] <= 1.0 and 0.0 < r["p_ecc_gt_0p1_prior"] < 1.0
    assert _finite(r["ess"]) and r["ess"] > 0 and r["n_samples"] >= 500
    assert _finite(r["log_evidence"]["eccentric"]) and _finite(r["log_evidence"]["circular"])
    if q == 1.0:
        # densities agree: a near-circular posterior (g = 1 at e = 0; Dawson & Johnson 2012)
        assert r["ecc"]["q50"] < 0.15
    else:
        # a mismatch needs e >= ecc_min for some omega (Kipping 2010 g^3 relation): the 95 % interval
        # reaches it
        assert r["ecc"]["q975"] >= r["ecc_min"]


@pytest.mark.parametrize("name, tr, sr, q", PAIRS)
def test_eclipses(outputs, name, tr, sr, q):
    r = _by_name(outputs("eclipses"))[name]
    assert r["ok"] and r["errors"] == []
    assert 0.0 <= r["p_occultation"] <= 1.0
    assert _quantiles_ok(r["occ_phase"], 0.0, 1.0)
    assert _quantiles_ok(r["occ_duration_h"], lo=0.0)
    if q == 1.0:
        # a circular orbit puts the occultation half a period after the transit (Winn 2010, the transit-
        # occultation delay at e = 0; eq. 33, number value from memory)
        assert r["occ_phase"]["q50"] == pytest.approx(0.5, abs=0.05)
    # the thermal depth needs the star's Teff; without it the depth is null and the record says why
    if "teff_k" in STAR_ROUTES[sr]:
        assert _quantiles_ok(r["depth_ppm"], lo=0.0)
    else:
        assert r["depth_ppm"]["q50"] is None and any("Teff unknown" in w for w in r["warnings"])


@pytest.mark.parametrize("name, tr, sr, q", DOWNSTREAM_PAIRS)
def test_rv(outputs, name, tr, sr, q):
    r = _by_name(outputs("rv"))[name]
    assert r["ok"] and r["errors"] == []
    # K and the planet mass: finite and positive; a planet of 1 R_J (Rp/R* = 0.1 around 0.98 R_sun) at
    # P = 3-14 d has K of metres to a few km per second (common practice, no source)
    assert _quantiles_ok(r["k_ms"], lo=0.0) and 0.1 < r["k_ms"]["q50"] < 5000
    assert _quantiles_ok(r["mp_mearth"], lo=0.0)
    assert _finite(r["sigma_rv_ms"]) and r["sigma_rv_ms"] > 0
    assert isinstance(r["n_epochs_detect_k"], int) and r["n_epochs_detect_k"] >= 1
    assert all(0.0 <= ph < 1.0 for ph in r["best_phases"])


@pytest.mark.parametrize("name, tr, sr, q", DOWNSTREAM_PAIRS)
def test_night(outputs, name, tr, sr, q):
    doc = outputs("night")
    r = _by_name(doc)[name]
    assert r["ok"] and r["errors"] == []
    # every target is accounted for: a block that night, or a reason it has none
    blocks = [b for b in doc["blocks"] if b["name"] == name]
    reasons = [s["reason"] for s in doc["skipped"] if s["name"] == name]
    assert blocks or reasons
    assert r["n_blocks"] == len(blocks)
    for b in blocks:
        assert doc["night_start_utc"] <= b["start_utc"] < b["end_utc"] <= doc["night_end_utc"]
        assert _finite(b["value"]) and b["value"] >= 0


@pytest.mark.parametrize("name, tr, sr, q", DOWNSTREAM_PAIRS)
def test_campaign(outputs, name, tr, sr, q):
    r = _by_name(outputs("campaign"))[name]
    assert r["ok"] and r["errors"] == []
    assert all(_finite(h) and h >= 0 for h in r["hours"].values())
    for v in r["rv_visits"]:
        assert "2026-12-10" <= v["night"] <= "2026-12-12" and 0.0 <= v["phase"] < 1.0
    for w in r["occultation_windows"]:
        assert w["start_utc"] < w["end_utc"]


@pytest.mark.parametrize("name, tr, sr, q", DOWNSTREAM_PAIRS)
def test_plan(outputs, name, tr, sr, q):
    doc = outputs("plan")
    r = _by_name(doc)[name]
    assert r["ok"] and r["errors"] == []
    assert _quantiles_ok(r["ecc"], 0.0, 0.999999)
    assert _quantiles_ok(r["occultation"]["occ_phase"], 0.0, 1.0)
    assert _quantiles_ok(r["rv"]["k_ms"], lo=0.0)
    assert _finite(r["priority"]) and 0.0 <= r["priority"] <= 1.0 and isinstance(r["rank"], int)
    assert {"occultation_windows", "rv_visits", "hours"} <= set(r["campaign"])
    assert name in {t["name"] for t in doc["_night"]["targets"]}


# ------------------------------------------------------------------ check accepts exactly what assess can use

#: (name, columns beyond name/period/t0/ra/dec/vmag, accepted by check and assess, a column check names)
EDGE_ROWS = [
    ("X-durations-no-k", {"t14_h": 3.0, "t23_h": 2.5, "rho_star_cgs": 1.4}, False, "t14_h"),
    ("X-t14-only", {"t14_h": 3.0, "depth_ppm": 1e4, "rho_star_cgs": 1.4}, False, "t14_h"),
    ("X-t14-b-no-k-with-a_rs", {"a_rs": 12.0, "t14_h": 3.0, "b": 0.3, "rho_star_cgs": 1.4}, True, None),
    ("X-mass-only", {"a_rs": 12.0, "mstar_msun": 1.0}, False, "rho_star_cgs"),
    ("X-teff-logg-no-feh", {"a_rs": 12.0, "teff_k": 5800.0, "logg_cgs": 4.4}, False, "rho_star_cgs"),
    ("X-omega-no-ecc", {"a_rs": 12.0, "rho_star_cgs": 1.4, "omega_deg": 90.0}, False, "omega_deg"),
    ("X-ecc-no-omega", {"a_rs": 12.0, "rho_star_cgs": 1.4, "ecc": 0.3, "ecc_err": 0.02}, True, None),
    # the samplers cover e in [0, 0.99): a measurement wholly above is a row error in check, as in assess
    ("X-ecc-above-0.99", {"a_rs": 12.0, "rho_star_cgs": 1.4, "ecc": 0.999, "ecc_err": 1e-4,
                          "omega_deg": 90.0}, False, "ecc"),
    ("X-ecc-near-0.99", {"a_rs": 12.0, "rho_star_cgs": 1.4, "ecc": 0.985, "ecc_err": 0.003,
                         "omega_deg": 90.0}, True, None),
    # the coolest accepted Teff (250 K) on the Torres route: accepted, assessed (Torres range warned)
    ("X-teff-250", {"a_rs": 12.0, "teff_k": 250.0, "logg_cgs": 5.0, "feh_dex": 0.0}, True, None),
    ("X-grazing", {"t14_h": 2.0, "b": 1.05, "rp_rs": 0.1, "rho_star_cgs": 1.4}, True, None),
    ("X-t23-near-t14", {"t14_h": 3.0, "t23_h": 2.9, "rp_rs": 0.1, "rho_star_cgs": 1.4}, False, "t23_h"),
    ("X-extreme-densities", {"rho_circ_cgs": 1e5, "rho_star_cgs": 1e-6}, True, None),
]


def test_check_accepts_exactly_the_rows_assess_can_use(tmp_path):
    cols = ["name", "ra_deg", "dec_deg", "vmag", "period_d", "t0_bjd"]
    rows = []
    for name, extra, _ok, _col in EDGE_ROWS:
        cols += [c for c in extra if c not in cols]
        rows.append({"name": name, "ra_deg": 60.0, "dec_deg": -25.0, "vmag": 10.5, "period_d": 4.0,
                     "t0_bjd": 2461000.5, **extra})
    cat = _write_csv(tmp_path / "edge.csv", rows, cols)
    checked = _run(["check", str(cat), "--json", str(tmp_path / "c.json")], tmp_path / "c.json")
    assessed = _run(["assess", str(cat), *SAMPLES, *SEED, "--json", str(tmp_path / "a.json")], tmp_path / "a.json")
    assert checked["_rc"] == assessed["_rc"] == 1       # some rows failed, nothing crashed
    rows_ok = {r["name"]: r["ok"] for r in checked["rows"]}
    assert rows_ok == {name: ok for name, _e, ok, _c in EDGE_ROWS}
    # assess runs exactly the rows check accepts, and every one of them is assessed (ok)
    assert {t["name"] for t in assessed["targets"]} == {n for n, ok in rows_ok.items() if ok}
    assert all(t["ok"] for t in assessed["targets"]), [t["errors"] for t in assessed["targets"] if not t["ok"]]
    # every rejected row is reported with its column, the same by both commands
    for name, _e, ok, col in EDGE_ROWS:
        if not ok:
            issues = [i for i in checked["row_errors"] if i["name"] == name]
            assert issues and any(col in i["column"] for i in issues), (name, issues)
            assert issues == [i for i in assessed["row_errors"] if i["name"] == name]
    skipped = _by_name(assessed)["X-t14-b-no-k-with-a_rs"]["warnings"]
    assert any("duration route" in w and "skipped" in w for w in skipped)


def test_density_only_catalogue_gives_finite_posteriors(tmp_path):
    # issue 10, "Done when": rho_circ_cgs + rho_star_cgs rows only (no radius ratio, no coordinates)
    cols = ["name", "period_d", "t0_bjd", "rho_circ_cgs", "rho_circ_cgs_err", "rho_star_cgs", "rho_star_cgs_err"]
    rows = [{"name": f"D-{i}", "period_d": p, "t0_bjd": 2461000.5 + i, "rho_circ_cgs": rc,
             "rho_circ_cgs_err": 0.1 * rc, "rho_star_cgs": rs, "rho_star_cgs_err": 0.05 * rs}
            for i, (p, rc, rs) in enumerate([(3.2, 1.4, 1.4), (7.5, 5.0, 1.2), (12.0, 0.3, 0.9), (40.0, 2.0, 0.1)])]
    cat = _write_csv(tmp_path / "density_only.csv", rows, cols)
    doc = _run(["assess", str(cat), *SAMPLES, *SEED, "--json", str(tmp_path / "a.json")], tmp_path / "a.json")
    assert doc["_rc"] == 0 and doc["n_ok"] == len(rows)
    for t in doc["targets"]:
        assert t["ok"] and t["radius_ratio_assumed"]
        assert _quantiles_ok(t["ecc"], 0.0, 0.999999) and _quantiles_ok(t["omega_deg"])
        assert all(_finite(v) for v in t["log_evidence"].values() if v is not None)
        assert _finite(t["log_evidence"]["eccentric"]) and 0.0 <= t["p_ecc_gt_0p1"] <= 1.0
