"""The star list (app/desk/star_list.py) over the ledger's rows, through the desk model."""

from __future__ import annotations

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
