"""The demo scenario ships as package data (found from a wheel), identical to examples/ and site_configs/."""
from pathlib import Path

from rhofollow.io.demo_data import demo_file, demo_root, differences, source_files

ROOT = Path(__file__).resolve().parents[1]


def test_package_data_is_an_exact_copy_of_the_checkout():
    diffs = differences(ROOT, ROOT / "src" / "rhofollow" / "data" / "demo")
    assert diffs == [], "run: python -m rhofollow.io.demo_data sync\n" + "\n".join(diffs)


def test_every_user_facing_data_file_is_shipped():
    rel = set(source_files(ROOT))
    assert {"examples/hts_candidates.csv", "examples/demo_malformed.csv", "examples/rv/HTS-104.csv",
            "examples/ledger/rv_heliotrope.csv", "site_configs/alto_quemado.toml",
            "site_configs/instruments/aq_vel.toml", "site_configs/instruments/aq_cam.toml"} <= rel
    assert not any(r.endswith(".py") for r in rel)   # generator scripts stay in the checkout


def test_demo_paths_come_from_the_installed_package(tmp_path, monkeypatch):
    import rhofollow
    from rhofollow.cli.plan import demo_paths
    from rhofollow.planning.site import check_site

    monkeypatch.chdir(tmp_path)
    cat, site = demo_paths()
    pkg = Path(rhofollow.__file__).resolve().parent
    assert demo_root() == pkg / "data" / "demo" and cat.parent.parent == demo_root()
    assert cat == demo_file("examples/hts_candidates.csv") and site.is_file()
    assert check_site(site) == []     # its relative instrument paths resolve inside the package data


def test_pyproject_ships_the_data_folder():
    import tomllib

    cfg = tomllib.loads((ROOT / "pyproject.toml").read_text())
    assert "data/**/*" in cfg["tool"]["setuptools"]["package-data"]["rhofollow"]
