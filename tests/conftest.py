"""Test configuration: under CI (CI=true) hypothesis runs derandomised, so a run is reproducible;
locally it explores new examples each run. Fixtures shared by several test files live here."""
import os
import types

import pytest
from hypothesis import settings

settings.register_profile("ci", derandomize=True, print_blob=True)
if os.environ.get("CI"):
    settings.load_profile("ci")

#: The demo site and a long night there (southern winter), shared by the night-plan and figure tests.
DEMO_SITE = "site_configs/alto_quemado.toml"
DEMO_NIGHT_DATE = "2026-06-20"


@pytest.fixture(scope="session")
def demo_night():
    """An invented night at the demo site with both block kinds (occultation windows placed by hand).

    Six invented targets spread in RA, each with one occultation window inside the night and an RV
    record; the night is planned once per test run. Returns a namespace with ``site``, ``engine``
    (the visibility engine), ``night`` (its night grid), ``date``, ``science`` (the science dicts,
    with ``bjd_minus_jd`` filled in) and ``plan`` (the :class:`~rhofollow.planning.night.NightPlan`).
    Tests take ``plan.to_dict()`` and must not change the science dicts in place.
    """
    from rhofollow.planning.night import night_visibility, plan_night, science_entry
    from rhofollow.planning.site import load_site
    from rhofollow.planning.tasks import jd_to_iso
    from rhofollow.planning.visibility import VisibilityEngine

    site = load_site(DEMO_SITE)
    eng = VisibilityEngine(site)
    night = eng.night(DEMO_NIGHT_DATE)
    s, e = night.start_jd, night.end_jd
    targets = [("HTS-301", 200.0, -35.0), ("HTS-302", 250.0, -50.0), ("HTS-303", 280.0, -20.0),
               ("HTS-304", 160.0, -60.0), ("HTS-305", 310.0, -5.0), ("HTS-306", 20.0, -30.0)]
    sci = []
    for k, (name, ra, dec) in enumerate(targets):
        w0 = s + (0.5 + 1.3 * k) / 24
        occ = {"p_occultation": 0.95, "occ_duration_h": 1.6,
               "events": [{"epoch": 40 + k, "window_utc": [[jd_to_iso(w0), jd_to_iso(w0 + 2.5 / 24)]]}]}
        rv = {"n_epochs_confirm_ecc": 5 + k, "hours_confirm_ecc": 0.4 * (5 + k), "best_phases": [0.3, 0.7]}
        entry = science_entry(name, evidence=0.5 + 0.08 * k, occultation=occ, rv=rv,
                              t0_bjd=s - 0.37 * k, period_d=1.5 + 0.9 * k)
        entry["ra_deg"], entry["dec_deg"] = ra, dec
        sci.append(entry)
    vis = night_visibility(eng, night, sci)
    plan = plan_night(sci, vis, site=site.name, night_start_jd=s, night_end_jd=e,
                      overhead_h=(site.slew_minutes + site.setup_minutes) / 60)
    return types.SimpleNamespace(site=site, engine=eng, night=night, date=DEMO_NIGHT_DATE, science=sci,
                                 plan=plan)
