"""The ledger: stars, photometry, results, verdicts, history, undo/redo, versions."""

import json
import sqlite3
from pathlib import Path

import numpy as np
import pytest

from phasewise.core.errors import LedgerError, LedgerVersionError
from phasewise.core.ledger import SCHEMA_VERSION, Ledger, file_checksum
from phasewise.core.lightcurve import LightCurve, StarMeta


def make_stars(n=4, n_points=60, seed=3):
    rng = np.random.default_rng(seed)
    stars = []
    for i in range(n):
        t = np.sort(rng.uniform(2460000.0, 2460100.0, n_points))
        band = np.where(rng.random(n_points) < 0.6, "V", "I")
        stars.append(
            LightCurve(
                f"NGX-{i:03d}",
                t,
                rng.normal(16.0, 0.2, n_points),
                rng.uniform(0.005, 0.02, n_points),
                band=band,
                time_scale="HJD",
                meta=StarMeta(ra=150.0 + i, dec=-30.5, source_file="field.csv"),
            )
        )
    return stars


def result_dict(period=0.55, cls="RRab", score=0.8, flags=("blend",)):
    return {
        "status": "ok",
        "period": period,
        "amplitude": 0.9,
        "fap": 1e-9,
        "flags": list(flags),
        "suggestions": [
            {"class": cls, "score": score, "reasons": ["R21 high"], "period": period},
            {"class": "RRc", "score": 0.1, "reasons": [], "period": period / 2},
        ],
        "mean_mag_by_band": {"V": 16.0},
        "odd": float("nan"),
    }


@pytest.fixture
def path(tmp_path):
    return tmp_path / "vet.ledger.sqlite"


@pytest.fixture
def led(path):
    with Ledger.create(path) as ledger:
        ledger.add_stars(make_stars(), source_file="field.csv", source_checksum="abc")
        yield ledger


def test_photometry_round_trips_exactly(path):
    stars = make_stars(n=3)
    stars[1] = stars[1].exclude([0, 5])
    stars[2] = LightCurve("NGX-NOERR", stars[2].time, stars[2].mag, None, band="R")
    with Ledger.create(path) as ledger:
        assert ledger.add_stars(stars) == 3
    with Ledger.open(path, readonly=True) as ledger:
        assert ledger.star_ids() == ["NGX-000", "NGX-001", "NGX-NOERR"]
        assert ledger.n_stars == 3
        for original in stars:
            back = ledger.lightcurve(original.star_id)
            np.testing.assert_array_equal(back.time, original.time)
            np.testing.assert_array_equal(back.mag, original.mag)
            np.testing.assert_array_equal(back.mag_err, original.mag_err)
            np.testing.assert_array_equal(back.band, original.band)
            np.testing.assert_array_equal(back.excluded, original.excluded)
            assert back.time_scale == original.time_scale
            assert back.has_errors == original.has_errors
        assert ledger.lightcurve("NGX-000").meta.ra == 150.0
        assert ledger.star_info("NGX-000")["source_file"] == "field.csv"


def test_blobs_are_raw_float64_not_pickle(led, path):
    led.close()
    conn = sqlite3.connect(path)
    blob = conn.execute("SELECT time FROM photometry ORDER BY star LIMIT 1").fetchone()[0]
    conn.close()
    np.testing.assert_array_equal(np.frombuffer(blob, dtype="<f8"), make_stars()[0].time)


def test_file_checksum_is_sha256(tmp_path):
    target = tmp_path / "f.txt"
    target.write_bytes(b"abc")
    # SHA-256("abc"), FIPS 180-2 appendix B.1 test vector
    assert file_checksum(target) == (
        "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
    )


def test_duplicate_star_is_refused_and_nothing_kept(led):
    extra = make_stars(n=6, seed=9)
    with pytest.raises(LedgerError, match="'NGX-000' is already in this ledger"):
        led.add_stars(extra[4:] + extra[:1])
    assert led.n_stars == 4


def test_unknown_star_names_the_ledger_and_star(led, path):
    with pytest.raises(LedgerError, match=rf"{path.name}: no star 'NOPE' in this ledger"):
        led.verdict("NOPE")


def test_create_refuses_existing_file(led, path):
    with pytest.raises(LedgerError, match="exists"):
        Ledger.create(path)


def test_verdicts_are_validated(led):
    with pytest.raises(LedgerError, match="unknown verdict status 'maybe'"):
        led.set_verdict("NGX-000", "maybe")
    with pytest.raises(LedgerError, match="'NGX-000': a relabelled verdict needs a class"):
        led.set_verdict("NGX-000", "relabelled")
    with pytest.raises(LedgerError, match="positive number of days"):
        led.set_verdict("NGX-000", "confirmed", period=-1.0)
    assert led.verdict("NGX-000").status == "unreviewed"


def test_verdict_is_committed_when_made(led, path):
    led.set_verdict("NGX-001", "relabelled", class_code="RRc", period=0.31, note="bump")
    # another connection (a read-only ledger) sees it at once: it is committed
    with Ledger.open(path, readonly=True) as other:
        verdict = other.verdict("NGX-001")
    assert (verdict.status, verdict.class_code, verdict.period, verdict.note) == (
        "relabelled",
        "RRc",
        0.31,
        "bump",
    )
    assert verdict.decided_at is not None


def test_readonly_refuses_writes(led, path):
    with Ledger.open(path, readonly=True) as other:
        with pytest.raises(LedgerError, match="read-only"):
            other.set_verdict("NGX-000", "rejected")


def test_undo_redo_walk_history_without_deleting(led):
    led.set_verdict("NGX-000", "confirmed", class_code="RRab", period=0.5)
    led.set_verdict("NGX-000", "rejected")
    n_before = len(led.history())
    assert led.undo_label() == "verdict rejected on NGX-000" and led.redo_label() is None
    undone = led.undo()
    assert led.redo_label() == "verdict rejected on NGX-000"
    assert undone.kind == "undo"
    assert [e.new["status"] for e in undone.entries] == ["confirmed"]
    assert led.verdict("NGX-000").status == "confirmed"
    led.undo()
    assert led.verdict("NGX-000").status == "unreviewed"
    assert led.undo() is None  # the import is not undoable
    assert led.redo().entries[0].new["status"] == "confirmed"
    assert led.verdict("NGX-000").class_code == "RRab"
    # a new action drops what is left to redo
    led.set_verdict("NGX-001", "deferred")
    assert led.redo() is None
    assert not led.can_redo()
    history = led.history()
    assert len(history) == n_before + 4  # two undos, one redo, one new verdict: all appended
    assert [h.kind for h in history[n_before:]] == ["undo", "undo", "redo", "do"]
    assert [h.id for h in history] == sorted(h.id for h in history)


def test_undo_redo_order_after_dropped_branch(led):
    # do A, do B, undo B, do C, undo C, undo A → redo gives A then C (B was dropped)
    led.set_verdict("NGX-000", "confirmed", class_code="RRab")  # A
    led.set_verdict("NGX-001", "rejected")  # B
    led.undo()
    led.set_verdict("NGX-002", "deferred")  # C
    led.undo()
    led.undo()
    assert [v.status for v in led.verdicts()[:3]] == ["unreviewed"] * 3
    assert led.redo().entries[0].star_id == "NGX-000"
    assert led.redo().entries[0].star_id == "NGX-002"
    assert led.redo() is None
    assert [v.status for v in led.verdicts()[:3]] == ["confirmed", "unreviewed", "deferred"]


def test_bulk_verdicts_are_one_action(led):
    led.set_verdicts([(s, "confirmed", "RRab", 0.5, None) for s in led.star_ids()])
    assert led.status_counts()["confirmed"] == 4
    action = led.undo()
    assert len(action.entries) == 4
    assert led.status_counts()["unreviewed"] == 4


def test_exclusion_mask_stored_undoable_and_makes_result_stale(led):
    led.set_analysis_settings({"method": "gls"}, "h1")
    led.store_results([("NGX-002", "h1", result_dict())])
    assert not led.result("NGX-002").stale
    mask = np.zeros(60, dtype=bool)
    mask[[3, 4, 10]] = True
    led.set_excluded("NGX-002", mask, reason="cosmic ray")
    np.testing.assert_array_equal(led.lightcurve("NGX-002").excluded, mask)
    assert led.lightcurve("NGX-002").n_points == 60  # nothing deleted
    assert led.result("NGX-002").stale
    assert led.stars_needing_analysis("h1", "stale") == ["NGX-000", "NGX-001", "NGX-002", "NGX-003"]
    entry = led.history("NGX-002")[-1]
    assert entry.what == "excluded" and entry.new == {"indices": [3, 4, 10], "reason": "cosmic ray"}
    led.undo()
    assert not led.excluded("NGX-002").any()
    with pytest.raises(LedgerError, match="expected a mask of 60 points"):
        led.set_excluded("NGX-002", np.zeros(5, dtype=bool))


def test_results_stale_and_resume_sets(led):
    assert led.stars_needing_analysis("h1") == led.star_ids()
    led.set_analysis_settings({"method": "gls"}, "h1")
    led.store_results([("NGX-000", "h1", result_dict()), ("NGX-001", "h1", result_dict())])
    led.store_failure("NGX-002", "h1", "too few points in band V")
    assert led.stars_needing_analysis("h1", "unanalysed") == ["NGX-003"]
    assert led.stars_needing_analysis("h1", "stale") == ["NGX-003"]
    stored = led.result("NGX-000")
    assert stored.result["suggestions"][0]["class"] == "RRab"
    assert np.isnan(stored.result["odd"])
    assert (stored.settings_hash, stored.stale, stored.failed) == ("h1", False, False)
    failed = led.result("NGX-002")
    assert failed.failed and failed.error == "too few points in band V" and failed.result is None
    assert led.result("NGX-003") is None
    led.set_analysis_settings({"method": "pdm"}, "h2")
    assert led.result("NGX-000").stale
    assert led.stars_needing_analysis("h2", "stale") == led.star_ids()
    assert led.stars_needing_analysis("h2", "all") == led.star_ids()
    with pytest.raises(LedgerError, match="expected one of"):
        led.stars_needing_analysis("h2", "some")


def test_reanalysis_keeps_verdicts_and_history(led):
    led.set_analysis_settings({"method": "gls"}, "h1")
    led.store_results([("NGX-000", "h1", result_dict(period=0.5))])
    led.set_verdict("NGX-000", "confirmed", class_code="RRab", period=0.5)
    n_history = len(led.history())
    led.set_analysis_settings({"method": "pdm"}, "h2")
    led.store_results([("NGX-000", "h2", result_dict(period=0.25, cls="RRc"))])
    assert led.verdict("NGX-000").class_code == "RRab"
    assert len(led.history()) == n_history + 1  # the settings change is recorded
    assert led.result("NGX-000").result["period"] == 0.25
    assert not led.result("NGX-000").stale


def test_star_rows_from_summary_columns(led):
    led.set_analysis_settings({}, "h1")
    led.store_results([("NGX-001", "h1", result_dict(period=0.6, score=0.93))])
    led.set_verdict("NGX-001", "relabelled", class_code="RRc", period=0.3)
    rows = led.star_rows()
    assert [r.star_id for r in rows] == led.star_ids()
    row = rows[1]
    assert (row.status, row.suggested_class, row.suggested_score, row.verdict_class) == (
        "relabelled",
        "RRab",
        0.93,
        "RRc",
    )
    assert row.period == 0.3  # the verdict's period wins
    assert row.suggested_period == 0.6
    assert (row.amplitude, row.fap, row.flags) == (0.9, 1e-9, ("blend",))
    assert row.analysed and not row.stale and not row.failed
    assert not rows[0].analysed and rows[0].period is None and rows[0].flags == ()


def test_checksum_follows_content(led):
    first = led.checksum()
    assert led.checksum() == first
    led.set_verdict("NGX-000", "deferred")
    assert led.checksum() != first


def test_newer_version_is_refused(led, path):
    led.close()
    conn = sqlite3.connect(path)
    conn.execute(f"PRAGMA user_version={SCHEMA_VERSION + 5}")
    conn.close()
    with pytest.raises(
        LedgerVersionError, match=f"newer Phasewise.*schema version {SCHEMA_VERSION + 5}"
    ):
        Ledger.open(path)


def test_foreign_sqlite_file_is_refused(tmp_path):
    other = tmp_path / "other.sqlite"
    conn = sqlite3.connect(other)
    conn.execute("CREATE TABLE t (x)")
    conn.commit()
    conn.close()
    with pytest.raises(LedgerError, match="not a Phasewise ledger"):
        Ledger.open(other)


def test_settings_round_trip(led):
    assert led.analysis_settings() is None and led.settings_hash is None
    led.set_analysis_settings({"periodogram": {"method": "gls", "oversampling": 5}}, "abc123")
    assert led.analysis_settings() == (
        {"periodogram": {"method": "gls", "oversampling": 5}},
        "abc123",
    )
    assert json.loads(json.dumps(led.history()[-1].new))["settings_hash"] == "abc123"


def test_threads_share_one_ledger(led):
    import threading

    errors = []

    def decide(star, status):
        try:
            for _ in range(20):
                led.set_verdict(star, status)
                led.star_rows()
        except Exception as exc:  # collected and asserted below
            errors.append(exc)

    threads = [
        threading.Thread(target=decide, args=(s, st))
        for s, st in (("NGX-000", "rejected"), ("NGX-001", "deferred"), ("NGX-002", "confirmed"))
    ]
    for thread in threads:
        thread.start()
    for thread in threads:
        thread.join()
    assert errors == []
    assert [v.status for v in led.verdicts()[:3]] == ["rejected", "deferred", "confirmed"]
    assert sum(1 for h in led.history() if h.what == "verdict") == 60


def test_lightcurves_iterates_in_import_order(led):
    assert [lc.star_id for lc in led.lightcurves()] == led.star_ids()
    assert [lc.star_id for lc in led.lightcurves(["NGX-003", "NGX-000"])] == ["NGX-003", "NGX-000"]


def test_duplicate_within_one_import(path):
    stars = make_stars(n=2)
    with Ledger.create(path) as ledger:
        with pytest.raises(LedgerError, match="'NGX-001' appears twice in this import"):
            ledger.add_stars(stars + stars[1:])
        assert ledger.n_stars == 0 and ledger.star_ids() == []


def test_listeners_hear_committed_changes_only(led):
    heard = []
    unsubscribe = led.subscribe(heard.append)
    led.set_verdict("NGX-001", "deferred")
    with pytest.raises(LedgerError):
        led.set_verdict("NGX-001", "relabelled")  # refused before any write
    led.store_results([("NGX-002", "h", result_dict())])
    led.undo()
    assert [(c.what, c.star_ids) for c in heard] == [
        ("verdict", ("NGX-001",)),
        ("results", ("NGX-002",)),
        ("undo", ("NGX-001",)),
    ]
    # a listener can read the ledger at once: the change is committed
    assert led.star_row("NGX-002").suggested_class == "RRab"
    unsubscribe()
    led.set_verdict("NGX-003", "rejected")
    assert len(heard) == 3


def test_create_ignores_side_files_of_a_deleted_ledger(path):
    with Ledger.create(path) as ledger:
        ledger.add_stars(make_stars(n=2))
        ledger.set_verdict("NGX-000", "rejected")
        # copy the live WAL aside, as a crash would leave it beside a deleted file
        wal = Path(f"{path}-wal").read_bytes()
    path.unlink()
    Path(f"{path}-wal").write_bytes(wal)
    with Ledger.create(path) as fresh:
        assert fresh.n_stars == 0
    with Ledger.open(path, check="full") as again:
        assert again.integrity_check() and again.n_stars == 0


def test_no_sql_outside_the_ledger_module():
    # the ledger is the only module that speaks SQL (DESIGN.md, architecture)
    root = Path(__file__).resolve().parents[2]
    offenders = [
        str(p.relative_to(root))
        for folder in ("core", "app")
        for p in (root / folder).rglob("*.py")
        if p.name != "ledger.py" or p.parent.name != "core"
        if "sqlite3" in p.read_text(encoding="utf-8")
    ]
    assert offenders == []


def test_undo_redo_match_an_editor_stack_model(led):
    # Reference model: the usual two-stack editor undo (common practice, no source).
    rng = np.random.default_rng(21)
    stars = led.star_ids()
    state = {s: "unreviewed" for s in stars}
    undo_stack, redo_stack = [], []
    for _ in range(120):
        move = rng.choice(["do", "do", "undo", "redo"])
        if move == "do":
            star = str(rng.choice(stars))
            status = str(rng.choice(["confirmed", "rejected", "deferred"]))
            undo_stack.append((star, state[star], status))
            redo_stack.clear()
            state[star] = status
            led.set_verdict(star, status)
        elif move == "undo":
            action = led.undo()
            if undo_stack:
                star, old, new = undo_stack.pop()
                redo_stack.append((star, old, new))
                state[star] = old
                assert action.entries[0].star_id == star
            else:
                assert action is None
        else:
            action = led.redo()
            if redo_stack:
                star, old, new = redo_stack.pop()
                undo_stack.append((star, old, new))
                state[star] = new
                assert action.entries[0].star_id == star
            else:
                assert action is None
        assert {v.star_id: v.status for v in led.verdicts()} == state
    assert led.can_undo() == bool(undo_stack) and led.can_redo() == bool(redo_stack)
