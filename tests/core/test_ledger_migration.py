"""The migrations to schema versions 3 and 4, from a ledger the version-2 code wrote.

``data/schema_v2.ledger.sqlite`` was made by the code of commit d3e22f6 (schema
version 2): six stars of ``make_survey(n_stars=6, seed=2026)``, five analysed
with ``core.analysis`` and one recorded failure, three verdicts (one undone),
and an exclusion mask.  The test reads its raw rows with ``sqlite3`` before
the migration and compares them with what the migrated ledger gives back.
"""

import json
import shutil
import sqlite3
from pathlib import Path

import numpy as np
import pytest

from phasewise.core import ledger as ledger_module
from phasewise.core.errors import LedgerError, LedgerVersionError
from phasewise.core.ledger import SCHEMA_VERSION, Ledger

FIXTURE = Path(__file__).parent / "data" / "schema_v2.ledger.sqlite"


@pytest.fixture
def v2(tmp_path):
    target = tmp_path / "old.ledger.sqlite"
    shutil.copyfile(FIXTURE, target)
    return target


def _raw(path):
    conn = sqlite3.connect(path)
    try:
        return {
            "version": conn.execute("PRAGMA user_version").fetchone()[0],
            "stars": conn.execute("SELECT id, star_id FROM stars ORDER BY id").fetchall(),
            "photometry": conn.execute(
                "SELECT star, time, mag, mag_err, excluded FROM photometry ORDER BY star"
            ).fetchall(),
            "results": conn.execute(
                "SELECT star, settings_hash, failed, error, result FROM results ORDER BY star"
            ).fetchall(),
            "verdicts": conn.execute(
                "SELECT star, status, class_code, period, note, decided_at FROM verdicts "
                "ORDER BY star"
            ).fetchall(),
            "history": conn.execute(
                "SELECT id, action, star_id, what, old, new FROM history ORDER BY id"
            ).fetchall(),
        }
    finally:
        conn.close()


def _same_json(a, b):
    # NaN != NaN, so compare the canonical text
    return json.dumps(a, sort_keys=True) == json.dumps(b, sort_keys=True)


def test_fixture_is_a_version_2_ledger():
    assert _raw(FIXTURE)["version"] == 2 and SCHEMA_VERSION == 4


def test_version_2_ledger_migrates_and_keeps_everything(v2):
    before = _raw(v2)
    names = dict(before["stars"])
    with Ledger.open(v2) as led:
        assert led.n_stars == 6
        for key, time, mag, err, excluded in before["photometry"]:
            lc = led.lightcurve(names[key])
            assert lc.time.tobytes() == time and lc.mag.tobytes() == mag
            assert lc.mag_err.tobytes() == err
            expected = np.zeros(lc.n_points, bool)
            if excluded is not None:
                expected = np.frombuffer(excluded, np.uint8).astype(bool)
            assert np.array_equal(lc.excluded, expected)
        for key, settings_hash, failed, error, text in before["results"]:
            stored = led.result(names[key])
            assert stored.settings_hash == settings_hash and stored.failed == bool(failed)
            assert stored.error == error and not stored.damaged
            if text is None:
                assert stored.result is None
            else:
                assert _same_json(stored.result, json.loads(text))
        for key, status, class_code, period, note, decided_at in before["verdicts"]:
            verdict = led.verdict(names[key])
            assert (verdict.status, verdict.class_code, verdict.period) == (
                status,
                class_code,
                period,
            )
            assert (verdict.note, verdict.decided_at, verdict.final) == (note, decided_at, None)
        history = led.history()
        assert [(h.id, h.action, h.star_id, h.what) for h in history] == [
            row[:4] for row in before["history"]
        ]
        assert all(
            _same_json(h.old, json.loads(r[4])) and _same_json(h.new, json.loads(r[5]))
            for h, r in zip(history, before["history"], strict=True)
        )
        # the star list reads the narrow summary table
        rows = {r.star_id: r for r in led.star_rows()}
        first = names[before["results"][0][0]]
        result = json.loads(before["results"][0][4])
        assert rows[first].period == pytest.approx(led.verdict(first).period or result["period"])
        assert rows[first].primary_band == result["primary_band"]
        assert led.check() == []
        checksum = led.checksum()
    conn = sqlite3.connect(v2)
    assert conn.execute("PRAGMA user_version").fetchone()[0] == SCHEMA_VERSION
    assert "result" not in [r[1] for r in conn.execute("PRAGMA table_info(results)")]
    conn.close()
    with Ledger.open(v2, readonly=True) as led:
        assert led.checksum() == checksum  # the stored sum, no recomputation


def test_migrated_ledger_undoes_and_redoes_old_actions(v2):
    with Ledger.open(v2) as led:
        star = led.star_ids()[4]
        assert led.excluded(star).sum() == 3
        action = led.undo()  # the exclusion recorded by the version-2 code
        assert action.entries[0].what == "excluded"
        assert led.excluded(star).sum() == 0 and led.result(star).stale
        led.redo()
        assert led.excluded(star).sum() == 3
        # a new verdict with final numbers, undone and redone
        target = led.star_ids()[3]
        final = {"period": 0.61, "fourier": {"R21": 0.45}, "epoch_kind": "maximum"}
        led.set_verdict(target, "confirmed", class_code="RRab", period=0.61, final=final)
        assert led.verdict(target).final == final
        led.undo()
        assert led.verdict(target).final is None and led.verdict(target).status == "unreviewed"
        led.redo()
        assert led.verdict(target).final == final
        assert led.check() == []


def test_version_2_ledger_is_not_migrated_read_only(v2):
    before = v2.read_bytes()
    with pytest.raises(LedgerVersionError, match="older Phasewise"):
        Ledger.open(v2, readonly=True)
    assert v2.read_bytes() == before


def test_failed_migration_rolls_back(v2, monkeypatch):
    def broken(conn):
        ledger_module._migrate_2_to_3(conn)
        raise LedgerError("step failed on purpose")

    monkeypatch.setitem(ledger_module.MIGRATIONS, 2, broken)
    with pytest.raises(LedgerError, match="on purpose"):
        Ledger.open(v2)
    raw = _raw(v2)
    assert raw["version"] == 2 and raw["results"]  # the old table is still there
    monkeypatch.undo()
    with Ledger.open(v2) as led:  # and the failed open released its lock
        assert led.check() == []


def test_version_1_ledger_takes_both_steps(v2):
    # version 1 lacked results.outdated and the index of action states
    conn = sqlite3.connect(v2)
    conn.execute("DROP INDEX actions_state")
    conn.execute("ALTER TABLE results DROP COLUMN outdated")
    conn.execute("PRAGMA user_version=1")
    conn.commit()
    conn.close()
    with Ledger.open(v2) as led:
        assert led.check() == []
        assert led.verdict(led.star_ids()[0]).class_code == "RRab"


def test_migration_registry_runs_every_step(v2, monkeypatch):
    calls = []
    later = SCHEMA_VERSION + 1

    def step_to_later(conn):
        calls.append(SCHEMA_VERSION)
        conn.execute("CREATE TABLE extra (x INTEGER)")

    monkeypatch.setattr(ledger_module, "SCHEMA_VERSION", later)
    monkeypatch.setitem(ledger_module.MIGRATIONS, SCHEMA_VERSION, step_to_later)
    with Ledger.open(v2) as upgraded:
        assert upgraded.n_stars == 6
    conn = sqlite3.connect(v2)
    assert conn.execute("PRAGMA user_version").fetchone()[0] == later
    assert conn.execute("SELECT COUNT(*) FROM extra").fetchone()[0] == 0
    conn.close()
    assert calls == [SCHEMA_VERSION]


def test_results_are_stored_compactly(v2):
    # the full result is zlib with a dictionary stored in the file: the
    # suggestions' repeated text costs a few bytes, not its length
    with Ledger.open(v2) as led:
        star = led.star_ids()[0]
        text = json.dumps(led.result(star).result)
    conn = sqlite3.connect(v2)
    sizes = [len(r[0]) for r in conn.execute("SELECT data FROM result_data")]
    conn.close()
    assert max(sizes) < len(text) / 3
