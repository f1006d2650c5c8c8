"""Fault injection without root: a full disk, read-only storage, a killed import,
a failed ``--overwrite``, a stale lock from another host, and the WAL-aware
header check.

A full disk is simulated with SQLite's ``PRAGMA max_page_count`` on the
ledger's own connection; read-only storage with file modes (and, where the
tests run as root and modes do not bind, by telling the ledger the file is
not writable).
"""

import os
import signal
import socket
import sqlite3
import stat
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from phasewise.app.cli import main
from phasewise.core import ledger as ledger_module
from phasewise.core.errors import LedgerError, LedgerLockedError
from phasewise.core.ledger import Ledger, lock_holder_of
from phasewise.core.lightcurve import LightCurve

ROOT = Path(__file__).resolve().parents[2]


def _stars(n, prefix="FQ", n_points=60, seed=4):
    rng = np.random.default_rng(seed)
    return [
        LightCurve(
            f"{prefix}-{i:04d}",
            np.sort(rng.uniform(0, 50, n_points)),
            rng.normal(15.0, 0.1, n_points),
            np.full(n_points, 0.01),
        )
        for i in range(n)
    ]


@pytest.fixture
def path(tmp_path):
    path = tmp_path / "faults.ledger.sqlite"
    with Ledger.create(path) as ledger:
        ledger.add_stars(_stars(20))
        ledger.set_verdict("FQ-0003", "confirmed", class_code="RRab", period=0.51)
        ledger.set_verdict("FQ-0007", "rejected", note="blend")
    return path


def _fill_disk(ledger):
    """Let the file grow by no more than a few pages (a full disk, as SQLite sees it)."""
    pages = ledger._conn.execute("PRAGMA page_count").fetchone()[0]
    ledger._conn.execute(f"PRAGMA max_page_count={pages + 2}")


def _decisions(path):
    with Ledger.open(path, readonly=True) as ledger:
        return {v.star_id: (v.status, v.class_code, v.period) for v in ledger.verdicts()}


# ----------------------------------------------------------------- disk full
def test_full_disk_during_import_loses_nothing_committed(path):
    before = _decisions(path)
    with Ledger.open(path) as ledger:
        _fill_disk(ledger)
        with pytest.raises(LedgerError, match="disk is full.*committed before is safe") as info:
            ledger.add_stars(_stars(300, prefix="NEW", n_points=500))
        assert "cannot rollback" not in str(info.value)
        assert ledger.n_stars == 20  # the failed import left no star behind
        # the ledger is still usable once space is free again
        ledger._conn.execute("PRAGMA max_page_count=1073741823")
        ledger.set_verdict("FQ-0001", "deferred")
    after = _decisions(path)
    assert after.pop("FQ-0001") == ("deferred", None, None)
    before.pop("FQ-0001")
    assert after == before
    with Ledger.open(path, readonly=True) as ledger:
        assert ledger.check() == []


def test_full_disk_during_bulk_verdicts_and_results(path):
    before = _decisions(path)
    with Ledger.open(path) as ledger:
        _fill_disk(ledger)
        ids = ledger.star_ids()
        with pytest.raises(LedgerError, match="disk is full"):
            ledger.set_verdicts(
                [(s, "confirmed", "RRab", 0.5, "x" * 5000, {"pad": "y" * 5000}) for s in ids]
            )
        with pytest.raises(LedgerError, match="disk is full"):
            pad = np.random.default_rng(1).bytes(20000).hex()  # does not compress away
            ledger.store_results([(s, "h", {"status": "ok", "pad": pad}) for s in ids])
        assert ledger.undo_label() == "verdict rejected on FQ-0007"
    assert _decisions(path) == before
    with Ledger.open(path, readonly=True) as ledger:
        assert ledger.check() == []
        assert ledger.result("FQ-0000") is None


def test_full_disk_while_building_keeps_the_old_ledger(path, tmp_path):
    before = _decisions(path)
    with pytest.raises(LedgerError, match="disk is full"):
        with Ledger.building(path, overwrite=True) as fresh:
            _fill_disk(fresh)
            fresh.add_stars(_stars(300, prefix="NEW", n_points=500))
    assert _decisions(path) == before
    assert not list(tmp_path.glob("*.building*"))


def test_cli_full_disk_message_is_one_sentence(path, monkeypatch, capsys):
    # the CLI opens its own connection: make every new connection's disk full
    real_open = Ledger.open.__func__

    def full_open(cls, *args, **kwargs):
        ledger = real_open(cls, *args, **kwargs)
        if not ledger.readonly:
            _fill_disk(ledger)
        return ledger

    monkeypatch.setattr(Ledger, "open", classmethod(full_open))
    code = main(["verdict", str(path), "FQ-0002", "--status", "deferred", "--note", "n" * 20000])
    out, err = capsys.readouterr()
    assert code == 2 and "disk is full" in err and "Traceback" not in err
    assert err.count("\n") == 1


# ----------------------------------------------------------------- read-only
@pytest.fixture
def read_only(path, monkeypatch):
    """The ledger's file and folder made read-only (and reported so when root ignores modes)."""
    folder = path.parent
    path.chmod(stat.S_IRUSR | stat.S_IRGRP)
    folder.chmod(stat.S_IRUSR | stat.S_IXUSR)
    if os.geteuid() == 0:  # modes do not bind root: tell the ledger what a user would meet
        monkeypatch.setattr(ledger_module, "_writable", lambda p: False)
        monkeypatch.setattr(ledger_module, "_folder_writable", lambda p: False)
    yield path
    folder.chmod(stat.S_IRWXU)
    path.chmod(stat.S_IRUSR | stat.S_IWUSR)


def test_read_only_ledger_reads_and_refuses_writes_plainly(read_only, capsys):
    path = read_only
    listing = sorted(os.listdir(path.parent))
    with Ledger.open(path, readonly=True) as ledger:
        assert ledger.verdict("FQ-0003").class_code == "RRab"
        assert ledger.n_stars == 20 and ledger.history()
    with pytest.raises(LedgerError, match="read-only here"):
        Ledger.open(path)
    for argv in (["ledger", "info", path], ["history", path]):
        code = main([str(a) for a in argv])
        out, err = capsys.readouterr()
        assert code == 0 and err == ""
    for argv in (["verdict", path, "FQ-0001", "--status", "deferred"], ["undo", path]):
        code = main([str(a) for a in argv])
        out, err = capsys.readouterr()
        assert code == 2 and "read-only here" in err and "Traceback" not in err
    assert sorted(os.listdir(path.parent)) == listing  # nothing written beside it


def test_read_only_export_works(read_only, tmp_path_factory, capsys):
    target = tmp_path_factory.mktemp("out") / "vetted.ecsv"
    code = main(["export", str(read_only), "-o", str(target)])
    capsys.readouterr()
    assert code == 0 and target.exists()


# ------------------------------------------------------ killed and failed imports
KILLED_IMPORT = """
import sys, numpy as np
from phasewise.core.ledger import Ledger
from phasewise.core.lightcurve import LightCurve
def stars():
    for i in range(10**9):
        if i == 200: print('deep', flush=True)
        yield LightCurve(f'S{i}', np.arange(500.0), np.ones(500))
with Ledger.building(sys.argv[1], overwrite=True) as ledger:
    ledger.add_stars(stars())
"""


def test_kill_during_import_blocks_no_rerun(path, tmp_path, capsys):
    before = _decisions(path)
    proc = subprocess.Popen(
        [sys.executable, "-c", KILLED_IMPORT, str(path)],
        cwd=ROOT,
        stdout=subprocess.PIPE,
        text=True,
    )
    assert proc.stdout.readline().strip() == "deep"
    proc.send_signal(signal.SIGKILL)
    proc.wait()
    proc.stdout.close()
    assert _decisions(path) == before  # the old ledger, verdicts and all
    assert list(tmp_path.glob(".faults.ledger.sqlite.*.building"))  # what the kill left
    # the rerun is not blocked, and removes what the killed build left
    csv = tmp_path / "field.csv"
    csv.write_text(
        "star_id,hjd,mag,err\n" + "".join(f"AB-1,{t},15.{t % 7},0.01\n" for t in range(30))
    )
    code = main(["ledger", "new", str(path), str(csv), "--overwrite"])
    capsys.readouterr()
    assert code == 0
    with Ledger.open(path, readonly=True) as ledger:
        assert ledger.star_ids() == ["AB-1"]
    assert not list(tmp_path.glob("*.building*"))


def test_failed_overwrite_keeps_the_old_ledger(path, tmp_path):
    before = _decisions(path)

    def stars_then_interrupt():
        yield from _stars(5, prefix="NEW")
        raise KeyboardInterrupt

    with pytest.raises(KeyboardInterrupt):
        with Ledger.building(path, overwrite=True) as fresh:
            fresh.add_stars(stars_then_interrupt())
    assert _decisions(path) == before
    assert not list(tmp_path.glob("*.building*"))


def test_overwrite_with_an_unreadable_file_keeps_the_old_ledger(path, tmp_path, capsys):
    before = _decisions(path)
    bad = tmp_path / "bad.csv"
    bad.write_text("star_id,hjd,mag\nAB-1,1.0,15.0\n")
    code = main(
        ["ledger", "new", str(path), str(bad), str(tmp_path / "missing.csv"), "--overwrite"]
    )
    _, err = capsys.readouterr()
    assert code == 2 and "missing.csv" in err
    assert _decisions(path) == before


def test_new_ledger_refuses_an_existing_name_without_overwrite(path, tmp_path, capsys):
    csv = tmp_path / "one.csv"
    csv.write_text("star_id,hjd,mag\n" + "".join(f"AB-1,{t},15.0\n" for t in range(20)))
    code = main(["ledger", "new", str(path), str(csv)])
    _, err = capsys.readouterr()
    assert code == 2 and "exists" in err
    assert len(_decisions(path)) == 20


# --------------------------------------------------------------- stale lock
def _foreign_lock(path, host="dome-controller-2"):
    conn = sqlite3.connect(path)
    conn.execute(
        "INSERT INTO lock(id, token, pid, host, since, program) VALUES (1, 't/1', 4242, ?, "
        "'2026-01-01T00:00:00+00:00', 'phasewise 0.1.0')",
        (host,),
    )
    conn.commit()
    conn.close()


def test_stale_foreign_lock_is_taken_over_with_confirmation(path, capsys):
    _foreign_lock(path)
    with pytest.raises(LedgerLockedError, match="dome-controller-2.*ledger unlock"):
        Ledger.open(path)
    code = main(["ledger", "unlock", str(path)])
    out, _ = capsys.readouterr()
    assert code == 1 and "--confirm-host dome-controller-2" in out
    assert lock_holder_of(path).host == "dome-controller-2"  # nothing changed
    code = main(["ledger", "unlock", str(path), "--confirm-host", "another-host"])
    _, err = capsys.readouterr()
    assert code == 2 and "not 'another-host'" in err
    code = main(["ledger", "unlock", str(path), "--confirm-host", "dome-controller-2"])
    out, _ = capsys.readouterr()
    assert code == 0 and "taken over" in out
    with Ledger.open(path) as ledger:  # the lock is free again
        entry = ledger.history()[-1]
        assert entry.what == "lock" and entry.old["host"] == "dome-controller-2"
        assert entry.new["host"] == socket.gethostname()
        assert ledger.undo_label() == "verdict rejected on FQ-0007"  # not an undoable action
        assert ledger.check() == []


def test_take_over_needs_the_exact_holder(path):
    _foreign_lock(path)
    holder = lock_holder_of(path)
    other = ledger_module.LockHolder(holder.pid + 1, holder.host, holder.since, holder.program)
    with pytest.raises(LedgerLockedError):
        Ledger.open(path, take_over=other)


def test_live_local_holder_is_never_overruled(path):
    with Ledger.open(path):
        holder = lock_holder_of(path)
        with pytest.raises(LedgerLockedError, match=f"process {os.getpid()}"):
            Ledger.open(path, take_over=holder)


# ------------------------------------------------------------ header and WAL
def _claim_more_pages(path, extra):
    with open(path, "r+b") as handle:
        header = bytearray(handle.read(100))
        n_pages = int.from_bytes(header[28:32], "big") + extra
        header[28:32] = n_pages.to_bytes(4, "big")
        handle.seek(0)
        handle.write(header)


def test_header_check_allows_for_a_live_wal(path):
    _claim_more_pages(path, 3)  # the header says more pages than the file holds
    assert "truncated" in ledger_module._header_problem(path)
    wal = Path(f"{path}-wal")
    wal.write_bytes(b"\0" * 32)  # pages may still sit in a live WAL: SQLite decides
    assert ledger_module._header_problem(path) is None
    wal.unlink()


def test_cli_analyse_on_a_full_disk_is_one_sentence(path, monkeypatch, capsys):
    real_open = Ledger.open.__func__

    def full_open(cls, *args, **kwargs):
        ledger = real_open(cls, *args, **kwargs)
        if not ledger.readonly:
            ledger._conn.execute("PRAGMA max_page_count=1")  # nothing more fits
        return ledger

    before = _decisions(path)
    monkeypatch.setattr(Ledger, "open", classmethod(full_open))
    code = main(["analyse", str(path), "--workers", "0", "--quiet"])
    _, err = capsys.readouterr()
    assert code == 2 and "disk is full" in err and "Traceback" not in err
    assert "cannot rollback" not in err and err.count("\n") == 1
    monkeypatch.undo()
    assert _decisions(path) == before


def test_cli_prints_control_characters_escaped(tmp_path, capsys):
    csv = tmp_path / "ansi.csv"
    star = "KRN\x1b[2J-1\x07"
    csv.write_text(
        "star_id,hjd,mag\n" + "".join(f'"{star}",{2460000 + t},15.{t}\n' for t in range(9))
    )
    ledger = tmp_path / "ansi.ledger.sqlite"
    assert main(["ledger", "new", str(ledger), str(csv)]) == 0
    assert main(["read", str(csv)]) == 0
    with Ledger.open(ledger) as led:
        assert led.star_ids() == [star]  # the id itself is kept as it is
    assert main(["verdict", str(ledger), star, "--status", "deferred"]) == 0
    assert main(["history", str(ledger)]) == 0
    out, err = capsys.readouterr()
    assert "\x1b" not in out + err and "\x07" not in out + err
    assert "KRN\\x1b[2J-1\\x07" in out
