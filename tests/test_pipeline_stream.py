"""Bounded memory of the chained run: samples go to a spool on disk as each chunk arrives and come
back bit for bit; the chunking of the chain changes no record, plan input or notice.

No physics is checked here (common practice, no source: a refactor keeps every number)."""
import json
import os
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st
from hypothesis.extra.numpy import arrays

from rhofollow.core.samples import SAMPLE_COLUMNS, SampleSet
from rhofollow.io.catalogue import read_catalogue
from rhofollow.pipeline import PipelineOptions, run_stages
from rhofollow.pipeline import runners
from rhofollow.pipeline.spool import SampleSpool, SpooledSamples
from rhofollow.planning.site import load_site
from rhofollow.stages.assess import assess_catalogue

ROOT = Path(__file__).resolve().parents[1]
NAMES = ("HTS-101", "HTS-103", "HTS-104", "HTS-107", "HTS-110")


def _set(values: np.ndarray, weights: np.ndarray) -> SampleSet:
    cols = {c: values + i for i, c in enumerate(SAMPLE_COLUMNS)}
    return SampleSet(name="T-1", weights=weights, meta={"vmag": 10.5, "dec_deg": -20.0}, **cols)


def _same_bits(a: SampleSet, b) -> bool:
    return all(np.asarray(getattr(a, c)).tobytes() == np.asarray(getattr(b, c)).tobytes()
               for c in tuple(SAMPLE_COLUMNS) + ("weights",))


@settings(max_examples=40, deadline=None)
@given(arrays(np.float64, st.integers(1, 50),
              elements=st.one_of(st.floats(-1e6, 1e6), st.just(np.nan), st.just(5e-324))),
       st.integers(0, 2**31 - 1))
def test_spool_gives_the_same_bits_back(values, seed):
    w = np.random.default_rng(seed).random(values.size)
    s = _set(values, w)
    spool = SampleSpool()
    try:
        h = spool.put(s)
        assert isinstance(h, SpooledSamples)
        assert (h.name, h.n, h.meta) == (s.name, s.n, s.meta)
        back = h.load()
        assert _same_bits(s, back)               # weights are not renormalised on the way back
        assert h.to_ecsv_text() == s.to_ecsv_text()
        assert h.quantiles("e") == s.quantiles("e")
    finally:
        spool.close()


def test_spool_keeps_one_set_loaded_and_removes_its_folder():
    rng = np.random.default_rng(3)
    spool = SampleSpool()
    a, b = (spool.put(_set(rng.normal(size=100), rng.random(100))) for _ in range(2))
    assert a.load() is a.load()                  # repeated reads of one set: one file read
    first = a.load()
    b.load()
    assert a.load() is not first                 # the slot now held b: a is read again
    folder = spool._dir
    assert len(os.listdir(folder)) == 2
    spool.close()
    assert not os.path.exists(folder)


def test_unwritable_spool_keeps_the_set_in_memory(tmp_path):
    s = _set(np.arange(5.0), np.ones(5))
    spool = SampleSpool(directory=tmp_path / "missing" / "folder")   # mkdtemp fails: no folder
    assert spool.put(s) is s
    assert spool.put(None) is None


@pytest.fixture(scope="module")
def setup():
    cat = read_catalogue(ROOT / "examples" / "hts_candidates.csv", require_coords=True)
    site = load_site(ROOT / "site_configs" / "alto_quemado.toml")
    return [t for t in cat.targets if t.name in NAMES], site


def _everything(st_) -> str:
    return json.dumps({"assess": [a.record for a in st_.assessments], "occ": st_.occultations, "rv": st_.rv,
                       "science": st_.science, "skipped": st_.skipped, "notices": st_.notices,
                       "failures": st_.failures}, sort_keys=True, default=str)


def test_chunking_of_the_chain_changes_nothing(setup, monkeypatch):
    targets, site = setup
    span = ("2026-12-10T12:00:00", "2026-12-14T12:00:00")
    opts = PipelineOptions(samples=1500, seed=9, sims=100)
    whole = run_stages(targets, site, *span, opts)
    monkeypatch.setattr(runners, "CHAIN_CHUNK", 2)
    parts = run_stages(targets, site, *span, opts)
    assert [a.name for a in whole.assessments] == list(NAMES)
    assert _everything(parts) == _everything(whole)
    # the stages hold the samples on disk, and they are the assessment's own samples
    fresh = assess_catalogue(targets, n_samples=1500, seed=9)
    for a, f in zip(parts.assessments, fresh):
        assert isinstance(a.samples, SpooledSamples)
        assert _same_bits(f.samples, a.samples.load())
