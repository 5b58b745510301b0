"""The bundled demo scenario as package data, found wherever rhofollow is installed.

``src/rhofollow/data/demo/`` holds copies of the data files of ``examples/`` and ``site_configs/``
(the user-facing copies in a source checkout; the generator scripts ``*.py`` stay in examples/).
A test keeps both identical; after changing a file in examples/ or site_configs/, run from the
checkout::

    python -m rhofollow.io.demo_data sync
"""
from __future__ import annotations

import shutil
import sys
from importlib import resources
from pathlib import Path

__all__ = ["demo_root", "demo_file", "SOURCE_DIRS", "source_files", "differences", "sync"]

#: Checkout folders mirrored into the package data (their data files, not their scripts).
SOURCE_DIRS = ("examples", "site_configs")


def demo_root() -> Path:
    """Folder of the installed demo data (``.../rhofollow/data/demo``).

    Returns
    -------
    pathlib.Path
        The folder.

    Raises
    ------
    FileNotFoundError
        The package data is missing (a broken installation) or the package is imported from a zip
        archive (no real folder to hand to the site file's relative paths).
    """
    root = resources.files("rhofollow") / "data" / "demo"
    path = Path(str(root))
    if not isinstance(root, Path) and not path.is_dir():
        raise FileNotFoundError(f"the demo data of rhofollow is not a folder on disk ({root})")
    if not path.is_dir():
        raise FileNotFoundError(f"the demo data folder {path} is missing from the installation")
    return path


def demo_file(relative: str) -> Path:
    """One demo file, e.g. ``demo_file("examples/hts_candidates.csv")``.

    Parameters
    ----------
    relative : str
        Path of the file inside the demo folder (POSIX separators).

    Returns
    -------
    pathlib.Path
        The installed file.

    Raises
    ------
    FileNotFoundError
        The file is not part of the installation.
    """
    path = demo_root() / relative
    if not path.is_file():
        raise FileNotFoundError(f"the bundled demo file {path} is missing from the installation")
    return path


def source_files(repo: Path) -> dict[str, Path]:
    """Every data file under the checkout's examples/ and site_configs/ (scripts left out).

    Parameters
    ----------
    repo : pathlib.Path
        Root of the source checkout.

    Returns
    -------
    dict of str to pathlib.Path
        Relative POSIX path -> file, in sorted order.
    """
    out = {}
    for d in SOURCE_DIRS:
        for f in sorted((repo / d).rglob("*")):
            if f.is_file() and f.suffix != ".py" and "__pycache__" not in f.parts:
                out[f.relative_to(repo).as_posix()] = f
    return out


def differences(repo: Path, package_dir: Path) -> list[str]:
    """Sentences naming each file that differs between the checkout and the package data.

    Parameters
    ----------
    repo : pathlib.Path
        Root of the source checkout.
    package_dir : pathlib.Path
        The package's demo folder.

    Returns
    -------
    list of str
        One sentence per file only in one place or with different contents (empty: identical).
    """
    src = source_files(repo)
    pkg = {f.relative_to(package_dir).as_posix(): f for f in package_dir.rglob("*") if f.is_file()
           and "__pycache__" not in f.parts}
    out = [f"{r}: only in the checkout" for r in sorted(set(src) - set(pkg))]
    out += [f"{r}: only in the package data" for r in sorted(set(pkg) - set(src))]
    out += [f"{r}: contents differ" for r in sorted(set(src) & set(pkg)) if src[r].read_bytes() != pkg[r].read_bytes()]
    return out


def sync(repo: Path, package_dir: Path) -> list[str]:
    """Make the package data an exact copy of the checkout's data files.

    Parameters
    ----------
    repo : pathlib.Path
        Root of the source checkout.
    package_dir : pathlib.Path
        The package's demo folder (replaced whole).

    Returns
    -------
    list of str
        What changed, as by :func:`differences` before the copy.
    """
    changed = differences(repo, package_dir)
    if package_dir.exists():
        shutil.rmtree(package_dir)
    for rel, f in source_files(repo).items():
        dest = package_dir / rel
        dest.parent.mkdir(parents=True, exist_ok=True)
        shutil.copyfile(f, dest)
    return changed


def _main(argv: list[str]) -> int:  # pragma: no cover - developer helper
    repo = Path(__file__).resolve().parents[3]
    pkg = Path(__file__).resolve().parents[1] / "data" / "demo"
    if argv[:1] == ["sync"]:
        for line in sync(repo, pkg) or ["already identical"]:
            print(line)
        return 0
    diffs = differences(repo, pkg)
    for line in diffs:
        print(line)
    return 1 if diffs else 0


if __name__ == "__main__":  # pragma: no cover
    sys.exit(_main(sys.argv[1:]))
