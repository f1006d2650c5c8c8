"""The star list (app/desk/star_list.py) over the ledger's rows, through the desk model."""

from __future__ import annotations

import numpy as np
import pytest

from phasewise.app.desk.star_list import FIELDS, PAGE, StarListWidget
from phasewise.core.desk import DeskModel
from phasewise.core.ledger import Ledger
from phasewise.core.lightcurve import LightCurve

from .desk_fixtures import desk_window  # noqa: F401  (the "desk" fixture)


def _suggested(desk, code):
    model = desk.star_list.model
    return [s for s in model.star_ids() if model.value(s, "suggested_class") == code]


def test_no_period_for_a_constant_or_a_rejected_star(desk, qtbot):
    model, ledger = desk.star_list.model, desk.ledger
    constants = _suggested(desk, "CONST")
    assert constants, "the demo subset holds constant stars (CAL-V005, CAL-V006)"
    for star_id in constants:
        # the analysis found a best period, but the catalogue gives a constant none
        assert ledger.star_row(star_id).period is not None
        assert model.value(star_id, "period") is None
    periodic = _suggested(desk, "RRab")[0]
    assert model.value(periodic, "period") is not None
    desk.select_star(periodic)
    desk.relabel("CONST")
    assert model.value(periodic, "period") is None  # the row followed the ledger's change
    desk.undo()
    assert model.value(periodic, "period") is not None
    desk.select_star(periodic)
    desk.set_verdict("rejected")
    assert model.value(periodic, "period") is None


def test_rows_follow_every_ledger_write(desk, qtbot):
    star_id = "CAL-V003"
    desk.ledger.set_verdict(star_id, "deferred")  # not through the window at all
    assert desk.star_list.model.value(star_id, "status") == "deferred"
    assert "1 deferred" in desk.star_list.counts_label.text()


N_SURVEY = 1200


@pytest.fixture
def survey_list(qtbot, tmp_path):
    """The list over a ledger of 1,200 invented stars (no analysis: the list's reads,
    order and filters are what is tested), the first 700 confirmed."""
    ledger = Ledger.create(tmp_path / "survey.ledger.sqlite")
    time = np.linspace(0.0, 10.0, 5)
    ledger.add_stars(
        LightCurve(f"SV-{i:05d}", time, np.full(5, 15.0), np.full(5, 0.02)) for i in range(N_SURVEY)
    )
    ledger.set_verdicts([(f"SV-{i:05d}", "confirmed", None, None, "") for i in range(700)])
    desk = DeskModel(ledger)
    widget = StarListWidget(desk)
    qtbot.addWidget(widget)
    reads = []
    read = ledger.star_rows_of
    ledger.star_rows_of = lambda ids: reads.append(len(ids)) or read(ids)
    widget.reload()
    widget.resize(500, 400)
    widget.show()
    qtbot.waitExposed(widget)
    yield widget, ledger, reads
    ledger.close()


def test_a_survey_list_reads_only_the_lines_it_shows(survey_list):
    widget, ledger, reads = survey_list
    widget.repaint()
    assert widget.model.rowCount() == N_SURVEY
    assert 0 < sum(reads) <= 2 * PAGE  # the lines painted, not the 1,200
    assert f"{N_SURVEY} of {N_SURVEY} shown" in widget.counts_label.text()
    assert "700 confirmed" in widget.counts_label.text()


def test_next_unreviewed_beyond_the_lines_read_comes_from_the_ledger(survey_list):
    widget, _ledger, _reads = survey_list
    assert widget.neighbour("SV-00000", +1, unreviewed=True) == "SV-00700"
    # round the end of the list, the current star last
    assert widget.neighbour("SV-01199", +1, unreviewed=True) == "SV-00700"
    assert widget.neighbour("SV-00700", -1, unreviewed=True) == "SV-01199"
    assert widget.neighbour("SV-00000", +1) == "SV-00001"
    assert widget.neighbour("SV-01199", +1) is None


def test_sort_and_filters_are_the_ledgers_order(survey_list, qtbot):
    widget, ledger, _reads = survey_list
    column = FIELDS.index("star_id")
    widget._sort_by(column)  # ascending, then descending
    widget._sort_by(column)
    assert widget.visible_star_ids()[:2] == ["SV-01199", "SV-01198"]
    assert widget.neighbour("SV-01199", +1) == "SV-01198"  # J follows the shown order
    widget.filter_edit.setText("sv-0011")
    expected = ledger.star_order("star_id", descending=True, text="sv-0011")
    assert widget.visible_star_ids() == expected and len(expected) == 10
    assert "10 of 1200 shown" in widget.counts_label.text()
    widget.filter_edit.clear()
    widget.status_box.setCurrentIndex(widget.status_box.findData("unreviewed"))
    assert widget.visible_star_ids() == [f"SV-{i:05d}" for i in range(1199, 699, -1)]
    ledger.set_verdict("SV-01199", "deferred")  # the list follows: the star leaves the filter
    assert widget.visible_star_ids()[0] == "SV-01198"


def test_a_star_leaves_and_rejoins_the_status_filter(survey_list):
    widget, ledger, _reads = survey_list
    widget.status_box.setCurrentIndex(widget.status_box.findData("unreviewed"))
    assert widget.visible_star_ids()[0] == "SV-00700"
    ledger.set_verdict("SV-00700", "confirmed")  # taken out of the shown lines
    assert widget.visible_star_ids()[:2] == ["SV-00701", "SV-00702"]
    assert "499 of 1200 shown" in widget.counts_label.text()
    ledger.undo()  # unreviewed again: back in its place
    assert widget.visible_star_ids()[:2] == ["SV-00700", "SV-00701"]


def test_a_verdict_does_not_move_the_lines_of_a_sorted_list(survey_list):
    widget, ledger, _reads = survey_list
    widget._sort_by(FIELDS.index("status"))  # ascending: confirmed first
    before = widget.visible_star_ids()
    assert widget.model.value(before[0], "status") == "confirmed"
    ledger.set_verdict(before[0], "rejected")
    assert widget.visible_star_ids() == before
    assert widget.model.value(before[0], "status") == "rejected"
