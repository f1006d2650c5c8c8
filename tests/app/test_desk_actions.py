"""Actions declared once (app/desk/actions.py) feed the menus, toolbar, F1 sheet and README."""

from __future__ import annotations

import re

from PySide6.QtGui import QKeySequence

from phasewise.app.desk.actions import ACTIONS, MENUS, SPECS, TOOLBAR, key_table, shown_keys

from .conftest import ROOT
from .desk_fixtures import desk_window  # noqa: F401  (the "desk" fixture)


def test_readme_holds_the_generated_key_table(qapp):
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    found = re.search(r"<!-- key table:[^\n]*-->\n(.*?)\n<!-- end of key table -->", readme, re.S)
    assert found, "README.md lost its key-table markers"
    assert found.group(1) == key_table(), (
        "README's key table differs from app/desk/actions.py: "
        "paste `python -m phasewise.app.desk.actions` between the markers"
    )


def test_no_key_is_bound_twice(qapp):
    seen = {}
    for spec in ACTIONS:
        for key in shown_keys(spec):
            assert key not in seen, f"{key} is bound to {seen[key]} and {spec.id}"
            seen[key] = spec.id


def test_every_declared_action_is_placed_once():
    def ids(items):
        for item in items:
            if isinstance(item, tuple):
                yield from ids(item[1])
            elif item != "-" and not item.startswith("@"):
                yield item

    placed = [i for _title, items in MENUS for i in ids(items)]
    assert sorted(placed) == sorted(SPECS)  # every action in exactly one menu
    assert set(TOOLBAR) - {"-"} <= set(SPECS)


def test_window_actions_menus_toolbar_and_key_sheet_come_from_the_table(desk, qtbot):
    assert set(desk.acts) == set(SPECS)
    for spec in ACTIONS:
        action = desk.acts[spec.id]
        assert action.text() == spec.text or spec.id in ("undo", "redo")  # labels follow history
        assert [s.toString() for s in action.shortcuts()] == [
            s.toString()
            for k in spec.keys
            for s in (
                QKeySequence.keyBindings(getattr(QKeySequence.StandardKey, k[4:]))
                if k.startswith("std:")
                else [QKeySequence(k)]
            )
        ]
    toolbar = [a for a in desk.toolbar.actions() if not a.isSeparator()]
    assert toolbar == [desk.acts[i] for i in TOOLBAR if i != "-"]
    assert [a.text() for a in desk.menuBar().actions()] == [title for title, _ in MENUS]
    desk.show_shortcuts()
    table = desk.shortcut_sheet.table
    rows = {table.item(r, 1).text() for r in range(table.rowCount())}
    desk.shortcut_sheet.close()
    with_keys = {s.text.replace("&", "") for s in ACTIONS if shown_keys(s)}
    assert with_keys - {"Undo", "Redo"} <= rows


def test_a_declared_slot_runs(desk, qtbot):
    period = desk.session.period
    desk.acts["double"].trigger()
    assert desk.session.period == 2 * period
    desk.acts["reset_period"].trigger()
    assert desk.session.period == period
