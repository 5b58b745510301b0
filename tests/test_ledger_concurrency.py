"""Real processes against one ledger: concurrent ingests lose nothing; a killed ingest leaves the
database consistent and re-running it completes it. Data are invented (HTS targets)."""
from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

from rhofollow.io.ledger import Ledger

CHILD = ("import sys; from rhofollow.io.ledger import Ledger; "
         "r = Ledger(sys.argv[1]).ingest_rv_file(sys.argv[2]); "
         "print(r.counts.get('rv_measurements', 0), int(r.already_ingested))")


def rv_file(path: Path, target: str, n: int, t_start: float) -> Path:
    lines = ["target,bjd_tdb,rv_ms,rv_err_ms,instrument"]
    lines += [f"{target},{t_start + 0.37 * i!r},{(i % 7) - 3.0},1.5,Alder" for i in range(n)]
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def spawn(db: Path, f: Path, **env) -> subprocess.Popen:
    full = dict(os.environ, **{k: str(v) for k, v in env.items()})
    return subprocess.Popen([sys.executable, "-c", CHILD, str(db), str(f)], env=full,
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)


def finish(p: subprocess.Popen, timeout: float = 60.0) -> str:
    out, err = p.communicate(timeout=timeout)
    assert p.returncode == 0, err
    return out.strip()


def test_two_processes_ingesting_at_once_lose_nothing(tmp_path):
    db = tmp_path / "c.sqlite"
    Ledger(db).close()
    a = rv_file(tmp_path / "a.csv", "HTS-101", 25, 2460100.0)
    b = rv_file(tmp_path / "b.csv", "HTS-102", 25, 2460200.0)
    # each process sleeps inside its transaction, so the two writes overlap in time
    pa = spawn(db, a, RHOFOLLOW_TEST_INGEST_DELAY_S=0.01)
    pb = spawn(db, b, RHOFOLLOW_TEST_INGEST_DELAY_S=0.01)
    assert finish(pa) == "25 0"
    assert finish(pb) == "25 0"
    with Ledger(db) as lg:
        assert len(lg.rv_measurements("HTS-101")) == 25
        assert len(lg.rv_measurements("HTS-102")) == 25
        assert len(lg.ingests()) == 2
        assert lg.integrity_ok()


def test_two_processes_ingesting_the_same_file_add_it_once(tmp_path):
    db = tmp_path / "c.sqlite"
    Ledger(db).close()
    a = rv_file(tmp_path / "a.csv", "HTS-103", 20, 2460300.0)
    procs = [spawn(db, a, RHOFOLLOW_TEST_INGEST_DELAY_S=0.01) for _ in range(2)]
    outs = sorted(finish(p) for p in procs)
    assert outs == ["0 1", "20 0"]  # one added everything, the other found it already there
    with Ledger(db) as lg:
        assert len(lg.rv_measurements("HTS-103")) == 20


@pytest.mark.skipif(not hasattr(signal, "SIGKILL"), reason="needs SIGKILL")
def test_killed_ingest_leaves_ledger_consistent_and_rerun_completes(tmp_path):
    db = tmp_path / "k.sqlite"
    with Ledger(db) as lg:
        lg.add_done("HTS-104", "2026-01-01T00:00:00", "rv")
        before = lg.content()
    f = rv_file(tmp_path / "slow.csv", "HTS-104", 40, 2460400.0)
    marker = tmp_path / "inside.txt"
    p = spawn(db, f, RHOFOLLOW_TEST_INGEST_DELAY_S=0.2, RHOFOLLOW_TEST_INGEST_MARKER=marker)
    deadline = time.monotonic() + 60
    while not marker.exists():  # the child has written its first row inside the transaction
        assert p.poll() is None, p.stderr.read()
        assert time.monotonic() < deadline
        time.sleep(0.02)
    time.sleep(0.3)  # a few more rows written, still far from the end (40 x 0.2 s)
    p.send_signal(signal.SIGKILL)
    p.wait(timeout=30)
    p.stdout.close()
    p.stderr.close()
    assert p.returncode == -signal.SIGKILL
    with Ledger(db) as lg:
        assert lg.integrity_ok()
        assert lg.content() == before          # nothing of the killed ingest survived
        assert len(lg.ingests()) == 1
        rep = lg.ingest_rv_file(f)              # re-running completes it
        assert rep.counts["rv_measurements"] == 40
        assert len(lg.rv_measurements("HTS-104")) == 40
        assert lg.integrity_ok()
