"""Seeded corruption: random bytes written into an analysed ledger change nothing silently.

The ledger is the version-2 fixture (stars of ``core.synthetic`` analysed by
``core.analysis``, verdicts, an undone verdict, an exclusion mask), migrated
to the current schema and given a verdict with final numbers.  Each of 20
seeded trials writes random bytes into a copy: anywhere in the file, or
inside a stored record (photometry, a compressed result, a verdict's note, a
history entry).  Every trial must end in one of: the file is refused on open,
``Ledger.check`` (``phasewise ledger check``) names a problem, a read raises
``LedgerError`` or returns a result marked damaged, or every read gives back
exactly the original content.  Any other outcome is a silent change; any
other exception is a traceback.  Both must be zero.
"""

import json
import shutil
import sqlite3
from pathlib import Path

import numpy as np
import pytest

from phasewise.app.cli import main
from phasewise.core.errors import LedgerError
from phasewise.core.ledger import Ledger

FIXTURE = Path(__file__).parent / "data" / "schema_v2.ledger.sqlite"
TRIALS = 20


@pytest.fixture(scope="module")
def analysed(tmp_path_factory):
    path = tmp_path_factory.mktemp("corrupt") / "analysed.ledger.sqlite"
    shutil.copyfile(FIXTURE, path)
    with Ledger.open(path) as ledger:  # migrates to the current schema
        star = ledger.star_ids()[3]
        final = {"period": 0.612, "fourier": {"R21": 0.44, "phi31": 5.1}}
        ledger.set_verdict(star, "confirmed", class_code="RRab", period=0.612, final=final)
    assert not Path(f"{path}-wal").exists()  # closing folded the WAL into the file
    return path


def _content(path):
    """Everything a reader can get from the ledger, as comparable plain data."""
    with Ledger.open(path, readonly=True) as ledger:
        stars = {}
        damaged = False
        for star_id in ledger.star_ids():
            lc = ledger.lightcurve(star_id)
            stored = ledger.result(star_id)
            damaged |= bool(stored and stored.damaged)
            stars[star_id] = (
                lc.time.tobytes(),
                lc.mag.tobytes(),
                lc.mag_err.tobytes(),
                tuple(np.asarray(lc.band).astype(str)),
                lc.excluded.tobytes(),
                lc.time_scale,
                lc.meta.ra,
                lc.meta.dec,
                None if stored is None else json.dumps(stored.result, sort_keys=True),
                None if stored is None else (stored.failed, stored.error, stored.stale),
                json.dumps(ledger.verdict(star_id).to_dict(), sort_keys=True),
                ledger.star_info(star_id)["source_checksum"],
            )
        history = [
            (e.id, e.action, e.kind, e.star_id, e.what, json.dumps([e.old, e.new], sort_keys=True))
            for e in ledger.history()
        ]
        rows = [tuple(map(repr, r.__dict__.values())) for r in ledger.star_rows()]
        return {
            "stars": stars,
            "history": history,
            "rows": rows,
            "settings": json.dumps(ledger.analysis_settings(), sort_keys=True),
            "checksum": ledger.checksum(),
            "undo": ledger.undo_label(),
        }, damaged


def _record_spans(path):
    """Byte ranges of stored records in the file, found by their bytes."""
    data = path.read_bytes()
    conn = sqlite3.connect(path)
    needles = [
        *[r[0] for r in conn.execute("SELECT time FROM photometry")],
        *[r[0] for r in conn.execute("SELECT mag FROM photometry")],
        *[r[0] for r in conn.execute("SELECT data FROM result_data")],
        *[r[0].encode() for r in conn.execute("SELECT new FROM history WHERE what = 'verdict'")],
        *[r[0].encode() for r in conn.execute("SELECT note FROM verdicts WHERE note IS NOT NULL")],
    ]
    conn.close()
    spans = []
    for needle in needles:
        start = data.find(needle[:48])
        if start >= 0:
            spans.append((start, start + min(len(needle), 4096 - start % 4096)))
    return spans


def _trial(original, path, rng, spans, k):
    data = bytearray(original)
    if k % 2 == 0 or not spans:
        offset = int(rng.integers(0, len(data) - 1))
    else:
        start, stop = spans[int(rng.integers(0, len(spans)))]
        offset = int(rng.integers(start, max(start + 1, stop - 1)))
    n = int(rng.integers(1, 33))
    data[offset : offset + n] = rng.bytes(len(data[offset : offset + n]))
    path.write_bytes(bytes(data))
    return offset


def test_random_bytes_never_change_the_ledger_silently(analysed, tmp_path):
    original_bytes = analysed.read_bytes()
    original, damaged = _content(analysed)
    assert not damaged
    with Ledger.open(analysed, readonly=True) as ledger:
        assert ledger.check() == []
    spans = _record_spans(analysed)
    assert len(spans) >= 10
    rng = np.random.default_rng(20261203)
    outcomes = {"refused": 0, "check": 0, "read": 0, "unchanged": 0}
    silent = []
    for k in range(TRIALS):
        copy = tmp_path / f"trial{k}.ledger.sqlite"
        offset = _trial(original_bytes, copy, rng, spans, k)
        # every read first (as a person would meet the damage), then the check;
        # anything but LedgerError escaping either is a traceback and fails the test
        try:
            content, damaged = _content(copy)
            read = "damaged" if damaged else ("same" if content == original else "changed")
        except LedgerError:
            read = "refused"
        try:
            with Ledger.open(copy, readonly=True) as ledger:
                problems = ledger.check()
            assert all(p.describe() for p in problems)
        except LedgerError:
            problems = ["refused"]
        if read == "refused" and problems == ["refused"]:
            outcomes["refused"] += 1
        elif problems:
            outcomes["check"] += 1
        elif read == "damaged":
            outcomes["read"] += 1
        elif read == "same":
            outcomes["unchanged"] += 1
        else:
            silent.append(offset)  # read something else, and nothing said so
    assert silent == [], f"silent changes at offsets {silent}; outcomes {outcomes}"
    assert sum(outcomes.values()) == TRIALS
    # the trials inside records must have been noticed, not shrugged off
    assert outcomes["refused"] + outcomes["check"] + outcomes["read"] >= TRIALS // 2 - 2


def test_check_names_the_damaged_star(analysed, tmp_path, capsys):
    copy = tmp_path / "one.ledger.sqlite"
    shutil.copyfile(analysed, copy)
    conn = sqlite3.connect(copy)
    star = conn.execute("SELECT star_id FROM stars WHERE id = 2").fetchone()[0]
    blob = bytearray(conn.execute("SELECT mag FROM photometry WHERE star = 2").fetchone()[0])
    blob[80:88] = np.float64(5e213).tobytes()  # one magnitude silently huge, as in the issue
    conn.execute("UPDATE photometry SET mag = ? WHERE star = 2", (bytes(blob),))
    conn.commit()
    conn.close()
    with Ledger.open(copy, readonly=True) as ledger:
        with pytest.raises(LedgerError, match=f"star '{star}': the stored photometry is damaged"):
            ledger.lightcurve(star)
        others = [s for s in ledger.star_ids() if s != star]
        assert all(ledger.lightcurve(s).n_points for s in others)  # the rest is usable
    code = main(["ledger", "check", str(copy)])
    out, _ = capsys.readouterr()
    assert code == 1 and f"star '{star}' photometry checksum mismatch" in out
    assert f"stars affected (1): {star}" in out


def test_damaged_result_is_reported_for_that_star_only(analysed, tmp_path):
    copy = tmp_path / "result.ledger.sqlite"
    shutil.copyfile(analysed, copy)
    conn = sqlite3.connect(copy)
    star = conn.execute("SELECT star_id FROM stars WHERE id = 3").fetchone()[0]
    conn.execute("UPDATE results SET period = period * 2 WHERE star = 3")
    conn.commit()
    conn.close()
    with Ledger.open(copy, readonly=True) as ledger:
        stored = ledger.result(star)
        assert stored.damaged and stored.failed and stored.result is None
        assert "damaged" in stored.error
        assert not any(ledger.result(s).damaged for s in ledger.star_ids() if s != star)
        assert [p.star_id for p in ledger.check() if p.star_id] == [star]


def test_check_of_a_sound_ledger(analysed, capsys):
    code = main(["ledger", "check", str(analysed)])
    out, _ = capsys.readouterr()
    assert code == 0 and ": ok (6 stars" in out
