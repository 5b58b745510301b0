"""`--workers` left out: one process for small catalogues, one per core for large ones (capped).
Every mode gives the same records (tests/test_dask.py), so only the time depends on the choice."""
from rhofollow.cli.common import resolve_workers
from rhofollow.core.executor import AUTO_MAX_WORKERS, AUTO_MIN_ITEMS, auto_workers


def test_small_catalogue_stays_in_one_process():
    assert auto_workers(AUTO_MIN_ITEMS - 1, cpus=4) == 1
    assert auto_workers(0, cpus=4) == 1


def test_large_catalogue_uses_every_core_up_to_the_cap():
    assert auto_workers(AUTO_MIN_ITEMS, cpus=2) == 2
    assert auto_workers(1000, cpus=64) == AUTO_MAX_WORKERS
    assert auto_workers(1000, cpus=1) == 1
    assert auto_workers(1000) >= 1  # this machine's cores


def test_given_value_wins():
    assert resolve_workers(3, 1000) == 3
    assert resolve_workers(1, 1000) == 1
    assert resolve_workers(None, 5) == 1
    assert resolve_workers(0, 1000) == 0  # refused by the command with a clear message


def test_summary_states_the_schedule_gap():
    # the report's assumptions say how close to the best the nights' schedules are proven to be
    from rhofollow.report.summary import assumptions

    sch = {"time_limit_s": 20.0, "mip_rel_gap": 0.01, "nights_scheduled": 9, "max_gap": 0.0042,
           "nights_not_optimal": [{"night": "2027-01-07", "status": "time limit", "gap": 0.0042}]}
    text = assumptions({}, sch)[-1]
    assert "within 1 %" in text and "20 s per night" in text and "0.42 %" in text and "2027-01-07" in text
    assert len(assumptions({})) == len(assumptions({}, sch)) - 1
