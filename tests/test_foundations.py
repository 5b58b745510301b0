"""The shared foundations: one error base, one warning base, one per-target generator, one set of run
defaults, one JSON writer, and the import contracts that keep the floors apart."""
from __future__ import annotations

import inspect
import json
import math
import tomllib
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from rhofollow import errors
from rhofollow.cli import COMMANDS, main

ROOT = Path(__file__).resolve().parents[1]


def _error_classes():
    from rhofollow.cli.common import UserError
    from rhofollow.io.atomic import NoSpaceError
    from rhofollow.io.catalogue import CatalogueError
    from rhofollow.io.instruments import InstrumentError
    from rhofollow.io.ledger import DuplicateMeasurementError, IngestError, LedgerError
    from rhofollow.io.rvdata import RVDataError
    from rhofollow.physics.kepler import KeplerConvergenceError
    from rhofollow.physics.occultation import ContactError
    from rhofollow.pipeline import PipelineError
    from rhofollow.planning.scheduler import ScheduleError
    from rhofollow.planning.site import ConfigError
    from rhofollow.report.folder import ReportFolderError
    from rhofollow.stages.occultations import EclipseInputError
    from rhofollow.stages.update import LedgerUpdateError

    # class -> (its kind in rhofollow.errors, the built-in base it had before and keeps)
    return {UserError: (errors.InputError, Exception), CatalogueError: (errors.InputError, ValueError),
            RVDataError: (errors.InputError, ValueError), InstrumentError: (errors.InputError, ValueError),
            EclipseInputError: (errors.InputError, ValueError), PipelineError: (errors.InputError, ValueError),
            ConfigError: (errors.ConfigError, ValueError), LedgerError: (errors.LedgerError, Exception),
            IngestError: (errors.LedgerError, Exception),
            DuplicateMeasurementError: (errors.LedgerError, Exception),
            LedgerUpdateError: (errors.LedgerError, ValueError),
            ReportFolderError: (errors.OutputError, Exception), NoSpaceError: (errors.OutputError, OSError),
            ScheduleError: (errors.RhofollowError, ValueError),
            KeplerConvergenceError: (errors.NumericalError, ArithmeticError),
            ContactError: (errors.NumericalError, ArithmeticError)}


def test_every_error_class_derives_from_the_one_base_and_keeps_its_old_base():
    for cls, (kind, old_base) in _error_classes().items():
        assert issubclass(cls, errors.RhofollowError), cls
        assert issubclass(cls, kind), cls
        assert issubclass(cls, old_base), cls       # `except ValueError` etc. still catch it


def test_the_names_stay_importable_where_they_were():
    from rhofollow.io.ledger import LedgerError
    from rhofollow.planning.site import ConfigError

    assert LedgerError is errors.LedgerError and ConfigError is errors.ConfigError


def test_warnings_share_one_base():
    from rhofollow.core.timescales import OfflineTablesWarning

    assert issubclass(OfflineTablesWarning, errors.RhofollowWarning)
    assert issubclass(errors.RhofollowWarning, UserWarning)


def test_input_error_carries_file_row_and_column():
    e = errors.InputError("cat.csv, row 3, column 'period_d': must be > 0", file=Path("cat.csv"), row=3,
                          column="period_d")
    assert (e.file, e.row, e.column) == ("cat.csv", 3, "period_d")
    assert str(e) == "cat.csv, row 3, column 'period_d': must be > 0"
    from rhofollow.io.catalogue import CatalogueError

    assert CatalogueError("cat.csv", "no rows").file == "cat.csv"
    c = errors.ConfigError("site.toml", ["key 'lat_deg' must lie in [-90, 90]"])
    assert c.file == "site.toml" and c.problems == ["key 'lat_deg' must lie in [-90, 90]"]
    assert str(c) == "site.toml: key 'lat_deg' must lie in [-90, 90]"


def _failing_command(monkeypatch, exc):
    import rhofollow.cli.check as check

    def boom(args):
        raise exc

    monkeypatch.setattr(check, "run", boom)


@pytest.mark.parametrize("exc", [errors.InputError("bad.csv, row 2, column 'b': not a number"),
                                 errors.LedgerError("ledger.sqlite: not a ledger"),
                                 errors.OutputError("out: holds files that are not part of a report")])
def test_cli_turns_every_rhofollow_error_into_one_sentence_and_status_2(monkeypatch, capsys, exc):
    _failing_command(monkeypatch, exc)
    assert main(["check", "whatever.csv"]) == 2
    err = capsys.readouterr().err
    assert err.strip() == f"error: {exc}"


def test_cli_reports_a_numerical_failure_as_internal_status_3(monkeypatch, capsys):
    from rhofollow.physics.kepler import KeplerConvergenceError

    _failing_command(monkeypatch, KeplerConvergenceError("Kepler's equation did not converge"))
    assert main(["check", "whatever.csv"]) == 3
    assert capsys.readouterr().err.startswith("internal error: KeplerConvergenceError")


# ---------------------------------------------------------------- seeds and defaults

def test_target_rng_is_the_documented_derivation():
    """The stream every output depends on: SeedSequence([seed & 0xFFFFFFFF, crc32(name)(, crc32(stage))])
    (core/seeds.py); changing it changes every number, so it is pinned here."""
    import zlib

    from rhofollow.core.seeds import target_rng, target_seed

    ref = np.random.default_rng(np.random.SeedSequence([20261202, zlib.crc32(b"HTS-104")])).random(4)
    assert np.array_equal(target_seed(20261202, "HTS-104").random(4), ref)
    assert np.array_equal(target_rng(20261202, "HTS-104").random(4), ref)
    ref = np.random.default_rng(np.random.SeedSequence(
        [7 & 0xFFFFFFFF, zlib.crc32(b"HTS-104"), zlib.crc32(b"mass")])).random(4)
    assert np.array_equal(target_rng(7, "HTS-104", "mass").random(4), ref)
    assert not np.array_equal(target_rng(7, "HTS-104", "lrt").random(4), ref)   # stages independent


@settings(max_examples=40, deadline=None)
@given(seed=st.integers(0, 2**40), names=st.lists(st.text(min_size=1, max_size=8), min_size=2, max_size=6,
                                                  unique=True))
def test_a_target_stream_does_not_depend_on_the_other_targets_or_their_order(seed, names):
    from rhofollow.core.seeds import target_rng

    forward = {n: target_rng(seed, n, "mass").random(3) for n in names}
    backward = {n: target_rng(seed, n, "mass").random(3) for n in reversed(names)}
    assert all(np.array_equal(forward[n], backward[n]) for n in names)


def test_the_old_generator_names_are_the_shared_one():
    from rhofollow.core.seeds import target_rng, target_seed
    from rhofollow.stages import assess, rv

    assert assess.target_seed is target_seed and rv._rng is target_rng


def test_one_default_seed_and_sample_count_for_the_cli_and_the_library():
    from rhofollow.cli import build_parser
    from rhofollow.core import defaults
    from rhofollow.pipeline import PipelineOptions
    from rhofollow.stages.assess import DEFAULT_N_SAMPLES, assess_catalogue, assess_target
    from rhofollow.stages.rv import plan_rv, rv_record

    for fn in (assess_target, assess_catalogue, rv_record, plan_rv):
        assert inspect.signature(fn).parameters["seed"].default == defaults.DEFAULT_SEED, fn
    assert DEFAULT_N_SAMPLES == defaults.DEFAULT_SAMPLES
    assert PipelineOptions().seed == defaults.DEFAULT_SEED
    assert PipelineOptions().samples == defaults.QUICK_SAMPLES
    parser = build_parser()
    for argv in (["assess", "c.csv"], ["rv", "c.csv", "--instrument", "i.toml"], ["plan", "--out", "o"],
                 ["demo"]):
        args = parser.parse_args(argv)
        assert args.seed == defaults.DEFAULT_SEED, argv
    assert parser.parse_args(["assess", "c.csv"]).samples == defaults.DEFAULT_SAMPLES
    assert parser.parse_args(["demo"]).samples == defaults.QUICK_SAMPLES
    assert parser.parse_args(["demo"]).sims == defaults.QUICK_SIMS
    assert parser.parse_args(["plan", "--out", "o"]).sims == defaults.DEFAULT_SIMS


@pytest.mark.parametrize("argv", [["assess", "c.csv", "--samples", "499"],
                                  ["plan", "c.csv", "--site", "s.toml", "--start", "2027-01-01",
                                   "--end", "2027-01-02", "--out", "o", "--samples", "499"]])
def test_the_minimum_sample_count_is_enforced(argv, tmp_path, monkeypatch, capsys):
    from rhofollow.core.defaults import MIN_SAMPLES

    monkeypatch.chdir(tmp_path)
    cat = ROOT / "examples" / "hts_candidates.csv"
    site = ROOT / "site_configs" / "alto_quemado.toml"
    argv = [str(cat) if a == "c.csv" else str(site) if a == "s.toml" else a for a in argv]
    assert main(argv) == 2
    assert f"--samples must be at least {MIN_SAMPLES}" in capsys.readouterr().err


# ---------------------------------------------------------------- JSON writer

_leaf = (st.none() | st.booleans() | st.integers(-10**6, 10**6)
         | st.floats(allow_nan=True, allow_infinity=True) | st.text(max_size=5))
_nest1 = st.lists(_leaf, max_size=4) | st.dictionaries(st.text(max_size=4), _leaf, max_size=4)
_json_values = (_leaf | _nest1 | st.lists(_nest1, max_size=3)
                | st.dictionaries(st.text(max_size=4), _leaf | _nest1, max_size=4))


def _finite_or_none(o):
    if isinstance(o, float):
        return o if math.isfinite(o) else None
    if isinstance(o, list):
        return [_finite_or_none(v) for v in o]
    if isinstance(o, dict):
        return {k: _finite_or_none(v) for k, v in o.items()}
    return o


@settings(max_examples=60, deadline=None)
@given(obj=_json_values)
def test_write_json_is_standard_json_with_non_finite_as_null(tmp_path_factory, obj):
    from rhofollow.io.jsonout import write_json

    path = tmp_path_factory.mktemp("j") / "out.json"
    write_json(path, obj)
    text = path.read_text()
    # no bare NaN / Infinity token (a key or string may spell the word: parse_constant sees only tokens)
    back = json.loads(text, parse_constant=lambda c: pytest.fail(f"non-standard token {c}"))
    assert back == _finite_or_none(obj)


def test_write_json_converts_numpy_values(tmp_path):
    from rhofollow.io.jsonout import write_json

    p = write_json(tmp_path / "n.json", {"a": np.float64(1.5), "b": np.int32(3), "c": np.array([1.0, np.nan]),
                                         "d": np.bool_(True), "e": Path("x/y")})
    assert json.loads(p.read_text()) == {"a": 1.5, "b": 3, "c": [1.0, None], "d": True, "e": "x/y"}


def test_cli_and_report_share_the_one_writer():
    from rhofollow.cli import common
    from rhofollow.io import jsonout

    assert common.write_json is jsonout.write_json


# ---------------------------------------------------------------- import contracts

def _contracts():
    return tomllib.loads((ROOT / "pyproject.toml").read_text())["tool"]["importlinter"]["contracts"]


def test_every_command_is_under_the_independence_contract():
    """A new command module is added to the contract with the command list (cli/__init__.COMMANDS)."""
    (indep,) = [c for c in _contracts() if c["type"] == "independence"]
    assert sorted(indep["modules"]) == sorted(f"rhofollow.cli.{name}" for name in COMMANDS)


def test_the_contracts_name_the_floors_of_the_layout():
    forbidden = {tuple(c["source_modules"]): set(c["forbidden_modules"]) for c in _contracts()
                 if c["type"] == "forbidden"}
    assert {"astropy", "rhofollow.io", "rhofollow.planning", "rhofollow.report", "rhofollow.stages",
            "rhofollow.cli"} <= forbidden[("rhofollow.physics",)]
    assert {"rhofollow.report", "rhofollow.cli"} <= forbidden[("rhofollow.stages",)]
    assert any("rhofollow.report" in src and "rhofollow.cli" in bad for src, bad in forbidden.items())
    for src, _bad in forbidden.items():
        for mod in src:
            rel = mod.removeprefix("rhofollow").lstrip(".").replace(".", "/")
            assert (ROOT / "src" / "rhofollow" / rel).is_dir() or (ROOT / "src" / "rhofollow" / f"{rel}.py").is_file()
