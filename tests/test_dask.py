"""A small catalogue on a local dask.distributed cluster (two worker processes) and on a process
pool gives the serial run's records exactly (byte-identical JSON)."""
import json
from pathlib import Path

import numpy as np
import pytest

distributed = pytest.importorskip("distributed")

from rhofollow.io.catalogue import read_catalogue  # noqa: E402
from rhofollow.core.executor import dispatch  # noqa: E402
from rhofollow.stages.assess_many import assess_parallel  # noqa: E402
from rhofollow.pipeline import PipelineOptions, run_stages  # noqa: E402
from rhofollow.planning.site import load_site  # noqa: E402

ROOT = Path(__file__).resolve().parents[1]
NAMES = ("HTS-103", "HTS-104", "HTS-107")


@pytest.fixture(scope="module")
def targets():
    cat = read_catalogue(ROOT / "examples" / "hts_candidates.csv", require_coords=True)
    return [t for t in cat.targets if t.name in NAMES]


@pytest.fixture(scope="module")
def cluster():
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None,
                                  silence_logs=50) as c:
        yield c


def _square_all(part, offset):
    return [x * x + offset for x in part]


@pytest.mark.parametrize("mode", ["serial", "pool", "dask"])
def test_dispatch_keeps_input_order(mode, cluster):
    kw = {"serial": {}, "pool": {"workers": 2}, "dask": {"dask_address": cluster.scheduler_address}}[mode]
    parts = list(dispatch(_square_all, range(23), chunk=2, window=3, make_job=lambda p: (p, 1), **kw))
    assert [x for p in parts for x in p] == [x * x + 1 for x in range(23)]
    assert all(len(p) <= 2 for p in parts)


def test_assessment_on_dask_equals_serial(targets, cluster):
    kw = dict(n_samples=2000, prior="kipping13", seed=11)
    serial = assess_parallel(targets, **kw)
    remote = assess_parallel(targets, dask_address=cluster.scheduler_address, chunk=2, **kw)
    assert [a.name for a in remote] == [a.name for a in serial]
    for a, b in zip(serial, remote):
        assert a.record == b.record
        np.testing.assert_array_equal(a.samples.e, b.samples.e)
        np.testing.assert_array_equal(a.samples.weights, b.samples.weights)


def _dump(stages):
    return json.dumps({"assess": [a.record for a in stages.assessments],
                       "occ": stages.occultations["targets"], "rv": stages.rv}, sort_keys=True)


def test_stages_on_dask_and_pool_equal_serial(targets, cluster):
    site = load_site(ROOT / "site_configs" / "alto_quemado.toml")
    start, end = "2026-12-10T12:00:00", "2026-12-14T12:00:00"
    base = dict(samples=2000, seed=5, sims=100)
    serial = run_stages(targets, site, start, end, PipelineOptions(**base))
    remote = run_stages(targets, site, start, end, PipelineOptions(dask_address=cluster.scheduler_address, **base))
    pool = run_stages(targets, site, start, end, PipelineOptions(workers=2, **base))
    assert remote.rv and all(r["ok"] for r in remote.rv)
    assert [r["name"] for r in remote.occultations["targets"]] == list(NAMES)
    # byte-identical records, lrt_threshold included, in every execution mode
    assert _dump(remote) == _dump(serial)
    assert _dump(pool) == _dump(serial)


def test_reachable_rv_and_request_equal_serial(targets, cluster):
    # the reachable-epoch power curves run through the executor as well: the RV records (power
    # curves, visits, thresholds) and the campaign's request are the same bytes in every mode
    import datetime as dt

    from rhofollow.pipeline import run_pipeline

    site = load_site(ROOT / "site_configs" / "alto_quemado.toml")
    start, end = dt.date(2026, 12, 10), dt.date(2026, 12, 20)
    base = dict(samples=2000, seed=5, sims=100)

    def dump(res):
        return json.dumps({"rv": res.stages.rv, "request": res.campaign.get("rv_request"),
                           "science": [{k: v for k, v in s.items() if k == "n_done"} for s in res.stages.science]},
                          sort_keys=True, default=str)

    serial = run_pipeline(targets, site, start, end, PipelineOptions(**base))
    assert any((r.get("confirm_reachable") or {}).get("power_curve") for r in serial.stages.rv)
    pool = run_pipeline(targets, site, start, end, PipelineOptions(workers=2, **base))
    remote = run_pipeline(targets, site, start, end, PipelineOptions(dask_address=cluster.scheduler_address, **base))
    assert dump(pool) == dump(serial)
    assert dump(remote) == dump(serial)
