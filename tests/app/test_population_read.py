"""The population view reads a large ledger in a worker thread, showing its progress.

The ledger is the six demo stars analysed by ``core.analysis`` (``subset_copy``);
the threshold above which the read leaves the GUI thread is lowered to 0 so
the six stars take the survey's path.
"""

import dataclasses
import json

import pytest

pytest.importorskip("pytestqt")

from phasewise.app.population import view as view_module  # noqa: E402
from phasewise.core import diagrams as dg  # noqa: E402
from phasewise.core.ledger import Ledger  # noqa: E402


def _text(points):
    return [json.dumps(dataclasses.asdict(p), sort_keys=True, default=str) for p in points]


@pytest.fixture
def ledger(subset_copy):
    with Ledger.open(subset_copy) as ledger:
        yield ledger


def test_a_large_ledger_is_read_off_the_gui_thread_with_progress(qtbot, ledger, monkeypatch):
    monkeypatch.setattr(view_module, "BACKGROUND_READ_STARS", 0)
    view = view_module.PopulationView()
    qtbot.addWidget(view)
    view.show()
    seen = []
    view._read_relay.progress.connect(lambda _g, done, total: seen.append((done, total)))
    view.set_ledger(ledger)
    assert view.is_reading() and view.points == []  # nothing read in the GUI thread
    assert view.progress_label.isVisible()
    assert "Reading the stars" in view.progress_label.text()
    qtbot.waitUntil(lambda: not view.is_reading(), timeout=20000)
    assert not view.progress_label.isVisible()
    assert _text(view.points) == _text(dg.star_points(ledger))
    assert seen[-1] == (ledger.n_stars, ledger.n_stars)


def test_a_change_during_the_read_is_applied_when_it_arrives(qtbot, ledger, monkeypatch):
    monkeypatch.setattr(view_module, "BACKGROUND_READ_STARS", 0)
    view = view_module.PopulationView()
    qtbot.addWidget(view)
    view.show()
    view.set_ledger(ledger)
    assert view.is_reading()
    star_id = ledger.star_ids()[0]
    # events are not processed yet: the worker's points cannot have been taken in
    ledger.set_verdict(star_id, "rejected")
    view.update_stars([star_id])
    qtbot.waitUntil(lambda: not view.is_reading(), timeout=20000)
    point = next(p for p in view.points if p.star_id == star_id)
    assert (point.status, point.class_code) == ("rejected", "REJECTED")


def test_a_read_of_a_ledger_replaced_meanwhile_is_dropped(qtbot, ledger, monkeypatch):
    monkeypatch.setattr(view_module, "BACKGROUND_READ_STARS", 0)
    view = view_module.PopulationView()
    qtbot.addWidget(view)
    view.show()
    view.set_ledger(ledger)
    view.set_ledger(None)
    view.wait_for_points(2000)
    view._read_pool.waitForDone(20000)
    qtbot.wait(50)
    assert view.points == [] and not view.is_reading()
