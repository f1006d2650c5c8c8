"""The population diagrams' records kept beside results and final numbers.

``Ledger.point_columns`` lets ``core.diagrams.point_table`` (and
``star_points``) draw 10^5 stars without decoding a full result each; these tests check that the fast read
gives exactly the points of the full read (``star_point``, star by star)
after every kind of verdict, undo and redo, on a ledger of seeded stars
analysed by ``core.analysis`` (``catalogue_fixtures``), and after the
migration from schema 3.

``data/schema_v3.ledger.sqlite`` was written by the code of commit c39a47a
(schema version 3): six stars of ``make_survey(n_stars=6, seed=2026)``, five
analysed with ``core.analysis`` and one recorded failure; verdicts recorded
with ``core.final.record_verdict`` (an RRc confirmed, a constant relabelled
CONST, an RRab relabelled EW at twice its period, a rejection undone) and an
exclusion mask.
"""

import dataclasses
import json
import shutil
import sqlite3
from pathlib import Path

import pytest

from phasewise.core.diagrams import star_point, star_points
from phasewise.core.final import record_verdict
from phasewise.core.ledger import SCHEMA_VERSION, Ledger
from phasewise.core.physics.derive import FEATURES_READ

from .catalogue_fixtures import build

V3 = Path(__file__).parent / "data" / "schema_v3.ledger.sqlite"


def _text(point):
    # NaN != NaN: compare the canonical text.  Of the features, only those
    # core.physics.derive reads count (test_physics_derive checks that nothing
    # else matters), and a feature set to None is one not given (derive reads
    # them with .get): the columnar read keeps no more than that.
    fields = dataclasses.asdict(point)
    fields["features"] = {
        k: v for k, v in fields["features"].items() if k in FEATURES_READ and v is not None
    }
    return json.dumps(fields, sort_keys=True, default=str)


def assert_fast_read_is_the_full_read(ledger):
    fast = star_points(ledger)
    full = [star_point(ledger, s) for s in ledger.star_ids()]
    assert [_text(p) for p in fast] == [_text(p) for p in full]
    assert ledger.check() == []
    return fast


@pytest.fixture(scope="module")
def seeded(tmp_path_factory):
    path = tmp_path_factory.mktemp("points") / "seeded.ledger.sqlite"
    ledger, roles, _ = build(path)
    ledger.close()
    return path, roles


@pytest.fixture
def field(seeded, tmp_path):
    path, roles = seeded
    copy = tmp_path / "field.ledger.sqlite"
    shutil.copyfile(path, copy)
    with Ledger.open(copy) as ledger:
        yield ledger, roles


def test_every_verdict_kind_undo_and_redo(field):
    ledger, roles = field
    points = assert_fast_read_is_the_full_read(ledger)
    assert sum(p.period is not None for p in points) >= 5  # numbers really compared
    period = ledger.result(roles["ew_as_rrc"]).result["period"]
    steps = [
        lambda: record_verdict(ledger, roles["rrab"], "confirmed"),
        lambda: record_verdict(ledger, roles["rrc"], "relabelled", class_code="EW"),
        lambda: record_verdict(ledger, roles["ew"], "relabelled", class_code="CONST"),
        lambda: record_verdict(
            ledger, roles["ew_as_rrc"], "relabelled", class_code="EW", period=2 * period
        ),
        lambda: record_verdict(ledger, roles["ea"], "confirmed", period=None),
        lambda: record_verdict(ledger, roles["rrd"], "rejected", note="blend"),
        lambda: record_verdict(ledger, roles["const"], "deferred"),
        # a person's period stored without final numbers (an older program's verdict)
        lambda: ledger.set_verdict(roles["const"], "deferred", period=1.2345),
        ledger.undo,
        ledger.undo,
        ledger.redo,
    ]
    for step in steps:
        step()
        assert_fast_read_is_the_full_read(ledger)
    doubled = star_points(ledger)[ledger.star_ids().index(roles["ew_as_rrc"])]
    assert doubled.class_code == "EW" and doubled.period == pytest.approx(2 * period, rel=1e-3)


def test_a_changed_record_is_reported_by_check(field):
    ledger, roles = field
    record_verdict(ledger, roles["rrab"], "confirmed")
    path = ledger.path
    ledger.close()
    conn = sqlite3.connect(path)
    with conn:
        conn.execute(
            "UPDATE points SET final_point = replace(final_point, '\"period\":', '\"period\":1') "
            "WHERE star = (SELECT id FROM stars WHERE star_id = ?)",
            (roles["rrab"],),
        )
    conn.close()
    with Ledger.open(path) as reopened:
        problems = reopened.check()
    assert [(p.star_id, p.record) for p in problems] == [(roles["rrab"], "points")]
    assert "final numbers" in problems[0].detail


def test_schema_3_ledger_migrates_with_its_records(tmp_path):
    path = tmp_path / "v3.ledger.sqlite"
    shutil.copyfile(V3, path)
    conn = sqlite3.connect(path)
    assert conn.execute("PRAGMA user_version").fetchone()[0] == 3
    conn.close()
    with Ledger.open(path) as ledger:
        points = assert_fast_read_is_the_full_read(ledger)
        rows = {r.star_id: r for r in ledger.point_rows()}
        verdicts = {v.star_id: v for v in ledger.verdicts()}
    assert SCHEMA_VERSION == 4
    assert sum(r.final_point is not None for r in rows.values()) == 3
    assert sum(r.result_point is not None for r in rows.values()) == 5
    assert sum(not r.analysed for r in rows.values()) == 1  # the recorded failure
    by_id = {p.star_id: p for p in points}
    ew = next(s for s, v in verdicts.items() if v.class_code == "EW")
    assert by_id[ew].class_code == "EW" and by_id[ew].period == pytest.approx(verdicts[ew].period)
    const = next(s for s, v in verdicts.items() if v.class_code == "CONST")
    assert by_id[const].period is None
