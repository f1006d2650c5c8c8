"""The ledger under abuse: killed writers, two writers, damaged files."""

import os
import signal
import sqlite3
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

from phasewise.core.errors import LedgerError, LedgerLockedError
from phasewise.core.ledger import Ledger
from phasewise.core.lightcurve import LightCurve

ROOT = Path(__file__).resolve().parents[2]


def _stars(n=50):
    rng = np.random.default_rng(11)
    return [
        LightCurve(f"KX-{i:03d}", np.arange(40.0), rng.normal(14.0, 0.1, 40), np.full(40, 0.01))
        for i in range(n)
    ]


@pytest.fixture
def path(tmp_path):
    path = tmp_path / "job.ledger.sqlite"
    with Ledger.create(path) as ledger:
        ledger.add_stars(_stars())
    return path


WRITER = """
import sys
from phasewise.core.ledger import Ledger
ledger = Ledger.open(sys.argv[1])
print("open", flush=True)
i = 0
while True:
    star = ledger.star_ids()[i % ledger.n_stars]
    ledger.set_verdict(star, "confirmed", class_code="RRab", period=0.5 + i * 1e-4, note=str(i))
    print(star, i, flush=True)
    i += 1
"""


def _start_writer(path):
    return subprocess.Popen(
        [sys.executable, "-c", WRITER, str(path)],
        cwd=ROOT,
        stdout=subprocess.PIPE,
        text=True,
    )


def test_killed_writer_loses_no_reported_verdict(path):
    proc = _start_writer(path)
    assert proc.stdout.readline().strip() == "open"
    reported = {}
    while True:
        line = proc.stdout.readline()
        star, i = line.split()
        reported[int(i)] = star
        if int(i) >= 150:
            break
    proc.send_signal(signal.SIGKILL)
    proc.wait()
    # the lock row of the dead process is stale: a new writer takes over
    with Ledger.open(path, check="full") as ledger:
        assert ledger.integrity_check()
        last_note = {}
        for i, star in sorted(reported.items()):
            last_note[star] = i
        for star, i in last_note.items():
            note = int(ledger.verdict(star).note)
            # the reported one is committed; a later unreported one may be too
            assert note >= i and (note - i) % ledger.n_stars == 0
        n_logged = sum(1 for h in ledger.history() if h.what == "verdict")
        assert n_logged >= len(reported)


def test_second_writer_is_told_who_holds_it(path):
    first = _start_writer(path)
    try:
        assert first.stdout.readline().strip() == "open"
        with pytest.raises(
            LedgerLockedError, match=rf"held for writing by process {first.pid} on "
        ):
            Ledger.open(path)
        # read-only opens are allowed meanwhile
        with Ledger.open(path, readonly=True) as reader:
            assert reader.lock_holder().pid == first.pid
        committed_star, _ = first.stdout.readline().split()
    finally:
        first.kill()
        first.wait()
    with Ledger.open(path) as ledger:
        assert ledger.lock_holder().pid == os.getpid()
        assert ledger.verdict(committed_star).status == "confirmed"  # nothing lost


def test_second_writer_in_same_process_is_refused(path):
    with Ledger.open(path) as ledger:
        ledger.set_verdict("KX-001", "deferred")
        with pytest.raises(LedgerLockedError, match=f"process {os.getpid()}"):
            Ledger.open(path)
        ledger.set_verdict("KX-002", "rejected")
    with Ledger.open(path) as ledger:
        assert ledger.verdict("KX-001").status == "deferred"
        assert ledger.verdict("KX-002").status == "rejected"
        assert ledger.lock_holder() is not None
    with Ledger.open(path, readonly=True) as ledger:
        assert ledger.lock_holder() is None  # closing released it


def test_lock_on_another_machine_is_respected(path):
    conn = sqlite3.connect(path)
    conn.execute(
        "INSERT INTO lock(id, token, pid, host, since, program) "
        "VALUES (1, 't', 1, 'observatory-node-7', '2026-01-01T00:00:00', 'phasewise 0.1.0')"
    )
    conn.commit()
    conn.close()
    with pytest.raises(LedgerLockedError, match="observatory-node-7.*another machine"):
        Ledger.open(path)


def _assert_refused_untouched(path, match):
    before = path.read_bytes()
    mtime = path.stat().st_mtime_ns
    with pytest.raises(LedgerError, match=match):
        Ledger.open(path)
    with pytest.raises(LedgerError, match=match):
        Ledger.open(path, readonly=True)
    assert path.read_bytes() == before
    assert path.stat().st_mtime_ns == mtime
    assert not Path(f"{path}-wal").exists()


def test_truncated_file_is_reported_and_untouched(path):
    size = path.stat().st_size
    with open(path, "r+b") as handle:
        handle.truncate(size // 2 // 8192 * 8192)  # whole pages, so only the length tells
    _assert_refused_untouched(path, rf"{path.name}: damaged: truncated")


def test_truncated_mid_page_is_reported(path):
    with open(path, "r+b") as handle:
        handle.truncate(path.stat().st_size - 100)
    _assert_refused_untouched(path, r"not a whole number of \d+-byte pages")


def test_garbage_file_is_reported_and_untouched(tmp_path):
    path = tmp_path / "junk.ledger.sqlite"
    path.write_bytes(np.random.default_rng(5).bytes(20000))
    _assert_refused_untouched(path, "not an SQLite file")


def test_empty_file_is_reported(tmp_path):
    path = tmp_path / "empty.ledger.sqlite"
    path.write_bytes(b"")
    _assert_refused_untouched(path, "empty")


def test_damaged_btree_page_is_found_by_the_check(path):
    # overwrite the second page (the first table's b-tree root) with junk,
    # keeping the header: only SQLite's own check can see this
    data = bytearray(path.read_bytes())
    data[4096 + 8 : 4096 + 3000] = np.random.default_rng(2).bytes(3000 - 8)
    path.write_bytes(bytes(data))
    before = path.read_bytes()
    # an ordinary open never reads the whole file; an open with a check does
    with pytest.raises(LedgerError, match="damaged"):
        Ledger.open(path, check="quick")
    assert path.read_bytes() == before
    try:
        with Ledger.open(path, readonly=True) as ledger:
            problems = ledger.check()  # what 'phasewise ledger check' runs
        assert problems and problems[0].record == "file"
    except LedgerError as exc:  # or the damaged page is met on the way in
        assert "damaged" in str(exc)
    assert path.read_bytes() == before


def test_missing_file(tmp_path):
    with pytest.raises(LedgerError, match="no such ledger file"):
        Ledger.open(tmp_path / "none.ledger.sqlite")


def test_overwrite_refuses_a_held_ledger(path):
    with Ledger.open(path):
        with pytest.raises(LedgerLockedError):
            Ledger.create(path, overwrite=True)
    with Ledger.create(path, overwrite=True) as fresh:
        assert fresh.n_stars == 0


def test_kill_during_import_leaves_previous_state(tmp_path):
    path = tmp_path / "import.ledger.sqlite"
    Ledger.create(path).close()
    code = (
        "import sys, numpy as np\n"
        "from phasewise.core.ledger import Ledger\n"
        "from phasewise.core.lightcurve import LightCurve\n"
        "def stars():\n"
        "    for i in range(10**9):\n"
        "        if i == 200: print('deep', flush=True)\n"
        "        yield LightCurve(f'S{i}', np.arange(500.0), np.ones(500))\n"
        "Ledger.open(sys.argv[1]).add_stars(stars())\n"
    )
    proc = subprocess.Popen(
        [sys.executable, "-c", code, str(path)], cwd=ROOT, stdout=subprocess.PIPE, text=True
    )
    assert proc.stdout.readline().strip() == "deep"
    time.sleep(0.05)
    proc.send_signal(signal.SIGKILL)
    proc.wait()
    with Ledger.open(path, check="full") as ledger:
        assert ledger.n_stars == 0  # one transaction: all or nothing


def test_reused_pid_is_not_taken_for_the_holder(path):
    # a lock row naming a live pid (ours) but another start time: a dead holder
    # whose pid was reused, so the lock is stale and is taken over
    import socket

    conn = sqlite3.connect(path)
    conn.execute(
        "INSERT INTO lock(id, token, pid, host, since, program) VALUES (1, ?, ?, ?, ?, ?)",
        ("dead/1", os.getpid(), socket.gethostname(), "2026-01-01T00:00:00", "phasewise 0.1.0"),
    )
    conn.commit()
    conn.close()
    if not Path(f"/proc/{os.getpid()}/stat").exists():
        pytest.skip("no /proc: start times cannot be compared here")
    with Ledger.open(path) as ledger:
        assert ledger.lock_holder().since != "2026-01-01T00:00:00"


RESULT_WRITER = """
import sys
from phasewise.core.ledger import Ledger
ledger = Ledger.open(sys.argv[1])
ledger.set_analysis_settings({"method": "gls"}, "s1")
ids = ledger.star_ids()
for k in range(0, len(ids), 5):
    batch = ids[k : k + 5]
    ledger.store_results([(s, "s1", {"status": "ok", "period": 0.5, "big": "x" * 20000}) for s in batch])
    print(" ".join(batch), flush=True)
    if k >= 20:
        sys.stdout.flush()
        import time; time.sleep(0.2)
"""


def test_killed_result_writer_keeps_every_reported_batch(path):
    proc = subprocess.Popen(
        [sys.executable, "-c", RESULT_WRITER, str(path)],
        cwd=ROOT,
        stdout=subprocess.PIPE,
        text=True,
    )
    reported = []
    for _ in range(6):
        reported.extend(proc.stdout.readline().split())
    proc.send_signal(signal.SIGKILL)
    proc.wait()
    with Ledger.open(path, check="full") as ledger:
        assert ledger.integrity_check()
        for star in reported:
            assert ledger.result(star).result["period"] == 0.5
        missing = ledger.stars_needing_analysis("s1", "stale")
        assert set(missing).isdisjoint(reported)
        assert len(missing) + len(reported) <= ledger.n_stars
