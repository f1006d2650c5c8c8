"""Where the window finds its icons: the ``phasewise.icons`` package resources."""

from __future__ import annotations

from pathlib import Path

from phasewise.app.desk.icons import ICON_DIR, icon

ROOT = Path(__file__).resolve().parents[2]


def test_every_icon_of_the_repository_ships_as_a_resource():
    shipped = {p.name for p in ICON_DIR.glob("*.svg")}
    in_repo = {p.name for p in (ROOT / "icons").glob("*.svg")}
    assert len(shipped) >= 10
    assert shipped == in_repo


def test_a_known_icon_loads_and_an_unknown_one_is_empty(qapp):
    assert not icon("confirm").isNull()
    assert icon("no-such-icon").isNull()
