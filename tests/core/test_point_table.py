"""The population's columnar read (``core.diagrams.point_table``) against the per-star read.

Seeded stars analysed by ``core.analysis`` (``catalogue_fixtures``), plus a
star never analysed and one whose analysis failed, with decided verdicts
(final numbers at the analysis's and at a person's period, a non-periodic
class, a rejection, a person's period stored without final numbers).  Every
row of the table, every diagram and the field summary must equal what the
per-star read (``star_point``, from the full results) gives.
"""

import dataclasses
import json
import shutil
import sqlite3

import numpy as np
import pytest

from phasewise.core import diagrams as dg
from phasewise.core.final import record_verdict
from phasewise.core.ledger import Ledger
from phasewise.core.physics.derive import FEATURES_READ
from phasewise.core.synthetic import make_survey

from .catalogue_fixtures import build


def _text(point):
    # as tests/core/test_ledger_points.py: the features derive reads, None = not given
    fields = dataclasses.asdict(point)
    fields["features"] = {
        k: v for k, v in fields["features"].items() if k in FEATURES_READ and v is not None
    }
    return json.dumps(fields, sort_keys=True, default=str)


@pytest.fixture(scope="module")
def seeded(tmp_path_factory):
    path = tmp_path_factory.mktemp("table") / "seeded.ledger.sqlite"
    ledger, roles, _ = build(path)
    extra = make_survey(3, seed=99).lightcurves  # invented stars of another seed
    extra = [dataclasses.replace(lc, star_id=f"EXTRA-{k}") for k, lc in enumerate(extra)]
    ledger.add_stars(extra)
    ledger.store_failures([("EXTRA-1", "h", "too few points")])
    roles.update(unanalysed="EXTRA-0", failed="EXTRA-1")
    period = ledger.result(roles["ew_as_rrc"]).result["period"]
    record_verdict(ledger, roles["rrab"], "confirmed")
    record_verdict(ledger, roles["ew_as_rrc"], "relabelled", class_code="EW", period=2 * period)
    record_verdict(ledger, roles["ew"], "relabelled", class_code="CONST")
    record_verdict(ledger, roles["rrd"], "rejected", note="blend")
    record_verdict(ledger, roles["unanalysed"], "relabelled", class_code="RRab")
    record_verdict(ledger, roles["failed"], "confirmed")
    # a person's period stored without final numbers (an older program's verdict)
    ledger.set_verdict(roles["const"], "deferred", period=1.2345)
    ledger.close()
    return path, roles


@pytest.fixture
def ledger(seeded, tmp_path):
    path, _ = seeded
    copy = tmp_path / "field.ledger.sqlite"
    shutil.copyfile(path, copy)
    with Ledger.open(copy) as opened:
        yield opened


def _full(ledger):
    return [dg.star_point(ledger, s) for s in ledger.star_ids()]


def test_every_row_is_the_per_star_read(ledger, seeded):
    _, roles = seeded
    calls = []
    table = dg.point_table(ledger, progress=lambda done, total: calls.append((done, total)))
    full = _full(ledger)
    assert [_text(p) for p in table.points()] == [_text(p) for p in full]
    assert calls[-1] == (len(full), len(full))
    by_id = {p.star_id: p for p in table.points()}
    assert by_id[roles["unanalysed"]].period is None
    assert by_id[roles["unanalysed"]].class_code == "RRab"  # the person's class, no numbers
    assert by_id[roles["failed"]].amplitude_by_band == {}
    assert by_id[roles["ew_as_rrc"]].class_code == "EW"
    assert by_id[roles["const"]].period == pytest.approx(1.2345)  # read in full
    assert by_id[roles["rrd"]].class_code == "REJECTED"
    assert sum(p.period is not None for p in full) >= 5  # numbers really compared
    assert sum(bool(p.features) for p in full) >= 5


def _same_diagram(a, b):
    assert a.star_ids == b.star_ids and a.class_codes == b.class_codes
    np.testing.assert_array_equal(a.x, b.x)  # exactly the same numbers
    np.testing.assert_array_equal(a.y, b.y)
    assert a.note == b.note and len(a.lines) == len(b.lines)


def test_diagrams_and_summary_are_those_of_the_points(ledger):
    table = dg.point_table(ledger)
    points = _full(ledger)
    assert dg.available_bands(table) == dg.available_bands(points)
    assert dg.class_counts(table) == dg.class_counts(points)
    for band in dg.available_bands(points):
        _same_diagram(dg.period_amplitude(table, band), dg.period_amplitude(points, band))
        _same_diagram(dg.period_luminosity(table, band), dg.period_luminosity(points, band))
    for make in (dg.phi31_logp, dg.r21_logp, dg.period_ratio, dg.colour_magnitude):
        _same_diagram(make(table), make(points))
    assert len(dg.period_amplitude(table, "V")) >= 5
    for relation in (None, *(name for name, _ in dg.pl_relations("V"))):
        state = dg.field_state(table, ebv=0.1, pl_relation=relation)
        expected = dg.field_state(points, ebv=0.1, pl_relation=relation)
        assert state.to_dict() == expected.to_dict()
        assert [(line.x.tolist(), line.y.tolist()) for line in state.pl_lines] == [
            (line.x.tolist(), line.y.tolist()) for line in expected.pl_lines
        ]
    # physics was really derived and compared (not only empty summaries)
    assert any(star.values for star in dg.star_physics(dg.summary_members(points)))


def test_a_point_list_round_trips_through_a_table(ledger):
    points = _full(ledger)
    table = dg.PointTable.from_points(points)
    assert [_text(p) for p in table.points()] == [_text(p) for p in points]
    changed = dataclasses.replace(points[2], class_code="DSCT", period=0.05)
    updated = table.with_points([changed])
    assert updated.point(2).class_code == "DSCT" and updated.point(2).period == 0.05
    assert table.point(2).class_code == points[2].class_code  # the old table is unchanged
    assert _text(updated.point(3)) == _text(points[3])


def test_a_record_that_is_not_plain_json_is_read_in_full(ledger, seeded):
    _, roles = seeded
    path = ledger.path
    ledger.close()
    conn = sqlite3.connect(path)
    with conn:
        # Python writes NaN, which is not JSON to SQLite: that star is read in full
        conn.execute(
            'UPDATE points SET result_point = replace(result_point, \'"R21":\', \'"R21":NaN,'
            '"R21_old":\') WHERE star = (SELECT id FROM stars WHERE star_id = ?)',
            (roles["rrc"],),
        )
    conn.close()
    with Ledger.open(path) as reopened:
        table = dg.point_table(reopened)
        full = _full(reopened)
    assert [_text(p) for p in table.points()] == [_text(p) for p in full]


def test_a_band_first_seen_in_a_later_chunk(ledger, seeded, monkeypatch):
    _, roles = seeded
    last = roles["rrc"]  # analysed, no verdict
    assert ledger.star_ids().index(last) >= 2  # not in the first chunk
    path = ledger.path
    ledger.close()
    conn = sqlite3.connect(path)
    with conn:
        conn.execute(
            "UPDATE points SET result_point = json_set(result_point, '$.mean_mag_by_band.R', 15.25) "
            "WHERE star = (SELECT id FROM stars WHERE star_id = ?)",
            (last,),
        )
    conn.close()
    monkeypatch.setattr(dg, "PROGRESS_STEP", 2)  # chunks of two stars
    with Ledger.open(path) as reopened:
        table = dg.point_table(reopened)
    assert table.point(table.row_of(last)).mean_mag_by_band["R"] == 15.25
    assert np.count_nonzero(~np.isnan(table.mean_mag["R"])) == 1
    assert "R" in dg.available_bands(table)
