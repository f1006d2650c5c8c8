"""Re-analysis from the desk runs in worker processes and reaches every view through
the ledger's change events (pytest-qt, offscreen, real analyses)."""

from __future__ import annotations

import numpy as np
import pytest

from phasewise.app.population import attach
from phasewise.core.diagrams import StarPoint

from .conftest import dispose

pytestmark = pytest.mark.slow  # worker processes start and import the analysis


@pytest.fixture
def desk_and_population(qtbot, qsettings, subset_copy):
    from phasewise.app.desk import MainWindow

    window = MainWindow(settings=qsettings)
    view = attach(window)
    window.open_ledger(subset_copy)
    window.show()
    window.show_view("population")
    window.wait_idle()
    yield window, view
    dispose(window)


def _point(view, star_id):
    return next(p for p in view.points if p.star_id == star_id)


def _expected_point(window, star_id):
    stored = window.ledger.result(star_id)
    return StarPoint.from_result(star_id, stored.result)


def test_excluding_points_reanalyses_in_a_worker_process_and_every_view_follows(
    desk_and_population, qtbot
):
    window, view = desk_and_population
    star_id = window.current_star
    before = window.ledger.result(star_id).result
    lc = window.desk.lc
    # exclude the faintest fifth of the points: the amplitude must change
    faint = np.argsort(lc.mag)[-len(lc.mag) // 5 :]
    window.reanalysis.exclude(faint, True)
    qtbot.waitUntil(lambda: not window.ledger.result(star_id).stale, timeout=60000)
    window.wait_idle()
    view.link.flush()
    after = window.ledger.result(star_id).result
    assert after["n_good"] == before["n_good"] - len(faint)
    # the list, the sheet and the diagrams show the new result, through the ledger's events
    assert window.star_list.model.value(star_id, "amplitude") == pytest.approx(after["amplitude"])
    assert window.desk.result == after and window.sheet.result == after
    expected = _expected_point(window, star_id)
    assert _point(view, star_id).amplitude_by_band == pytest.approx(expected.amplitude_by_band)
    assert after["amplitude"] != pytest.approx(before["amplitude"])


def test_a_batch_run_hands_the_ledger_over_and_every_view_follows(desk_and_population, qtbot):
    import dataclasses

    window, view = desk_and_population
    desk = window.desk
    desk.use_settings(dataclasses.replace(desk.analysis_settings(), fap_threshold=1e-6))
    worker = window.reanalysis.run("stale")  # other settings: every star is stale
    assert worker is not None and desk.read_only  # browsing goes on, verdicts wait
    assert not window.acts["confirm"].isEnabled()
    qtbot.waitUntil(lambda: worker.done.is_set(), timeout=120000)
    qtbot.waitUntil(lambda: not desk.read_only, timeout=10000)
    window.wait_idle()
    view.link.flush()
    assert window.acts["confirm"].isEnabled()
    for star_id in desk.star_ids():
        stored = window.ledger.result(star_id)
        assert not stored.stale and stored.settings_hash == desk.settings.hash
        assert window.star_list.model.value(star_id, "fap") == pytest.approx(stored.result["fap"])
        expected = _expected_point(window, star_id)
        assert _point(view, star_id).period == pytest.approx(expected.period, nan_ok=True)
    assert desk.result == window.ledger.result(desk.star_id).result
