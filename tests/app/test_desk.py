"""Click through the vetting workflow on six demo stars (pytest-qt, offscreen).

Everything is real: the ledger, core.analysis results, periodograms, Fourier
fits and the export.
"""

from __future__ import annotations

import numpy as np
import pytest
from PySide6.QtCore import QPointF, QRectF, Qt

from phasewise.app.desk import MainWindow

from .conftest import dispose
from .desk_fixtures import desk_window  # noqa: F401  (the "desk" fixture)


def _click_row(qtbot, window, row):
    view = window.star_list.view
    rect = view.visualRect(window.star_list.model.index(row, 0))
    qtbot.mouseClick(view.viewport(), Qt.MouseButton.LeftButton, pos=rect.center())


def _click_plot(qtbot, plot, x, y):
    vb = plot.getPlotItem().getViewBox()
    scene_pos = vb.mapViewToScene(QPointF(x, y))
    widget_pos = plot.mapFromScene(scene_pos)
    qtbot.mouseClick(plot.viewport(), Qt.MouseButton.LeftButton, pos=widget_pos)


def _fold_phases(window):
    return np.concatenate([s.getData()[0] for s in window.fold.main.bins])


def test_open_select_pick_peak_nudge(desk, qtbot):
    assert desk.current_star == "CAL-V001"
    _click_row(qtbot, desk, 1)
    qtbot.waitUntil(lambda: desk.current_star == "CAL-V002")
    qtbot.waitUntil(lambda: desk.periodogram.view is not None and bool(desk.periodogram.candidates))
    analysed = desk.session.period
    second = desk.periodogram.candidates[1]
    before = _fold_phases(desk).copy()
    # click a little off the second candidate's peak: the pick snaps to its maximum
    _click_plot(qtbot, desk.periodogram.plot, second["frequency"] + 0.0005, 0.5 * second["power"])
    assert desk.session.period == pytest.approx(second["period"], rel=1e-3)
    assert desk.session.period != pytest.approx(analysed, rel=1e-3)
    assert not np.allclose(_fold_phases(desk), before)
    assert f"{desk.session.period:.7f}" in desk.fold.main.fold.titleLabel.text
    assert desk.fold.spin.value() == pytest.approx(desk.session.period, rel=1e-7)
    # nudge with the keyboard: one small step longer, then a large step shorter
    p = desk.session.period
    step = desk.session.step()
    qtbot.keyClick(desk, Qt.Key.Key_Period)
    assert desk.session.period == pytest.approx(p + step)
    qtbot.keyClick(desk, Qt.Key.Key_Less)
    assert desk.session.period < p
    qtbot.keyClick(desk, Qt.Key.Key_Backspace)
    assert desk.session.period == pytest.approx(analysed)


def test_verdicts_undo_and_reopen(desk, qtbot, qsettings):
    ledger = desk.ledger
    # confirm CAL-V001 at a nudged period
    qtbot.keyClick(desk, Qt.Key.Key_Period)
    nudged = desk.session.period
    qtbot.keyClick(desk, Qt.Key.Key_Y)
    v = ledger.verdict("CAL-V001")
    assert (v.status, v.class_code) == ("confirmed", "RRab")
    assert v.period == pytest.approx(nudged)
    assert desk.current_star == "CAL-V002"  # advanced to the next unreviewed star
    qtbot.keyClick(desk, Qt.Key.Key_2)  # relabel as RRc
    assert (ledger.verdict("CAL-V002").status, ledger.verdict("CAL-V002").class_code) == (
        "relabelled",
        "RRc",
    )
    desk.sheet.note_edit.setText("blended with a neighbour")
    qtbot.mouseClick(desk.sheet.reject_button, Qt.MouseButton.LeftButton)
    assert ledger.verdict("CAL-V003").status == "rejected"
    assert ledger.verdict("CAL-V003").note == "blended with a neighbour"
    qtbot.keyClick(desk, Qt.Key.Key_D)
    assert ledger.verdict("CAL-V004").status == "deferred"
    model = desk.star_list.model
    assert model.value("CAL-V004", "status") == "deferred"
    assert model.status_counts()["unreviewed"] == 2
    # undo the deferral: back to unreviewed, in the ledger and in the list
    qtbot.keyClick(desk, Qt.Key.Key_Z, Qt.KeyboardModifier.ControlModifier)
    assert ledger.verdict("CAL-V004").status == "unreviewed"
    assert model.value("CAL-V004", "status") == "unreviewed"
    assert desk.current_star == "CAL-V004"
    # reopen the ledger in a new window: every verdict is there
    path = desk.ledger_path
    desk.close()
    again = MainWindow(settings=qsettings)
    again.open_ledger(path)
    assert again.ledger.verdict("CAL-V001").status == "confirmed"
    assert again.ledger.verdict("CAL-V002").class_code == "RRc"
    assert again.ledger.verdict("CAL-V003").status == "rejected"
    assert again.star_list.model.value("CAL-V002", "status") == "relabelled"
    assert str(path) in again.files.recent_files()
    dispose(again)


def test_filter_the_list(desk, qtbot):
    desk.set_verdict("rejected")
    desk.activateWindow()
    qtbot.keyClick(desk, Qt.Key.Key_F, Qt.KeyboardModifier.ControlModifier)  # Find: to the filter
    assert desk.star_list.filter_edit.hasFocus()
    qtbot.keyClicks(desk.star_list.filter_edit, "cal-v00")
    assert desk.star_list.model.rowCount() == 6
    desk.star_list.filter_edit.clear()
    qtbot.keyClicks(desk.star_list.filter_edit, "005")
    assert desk.star_list.visible_star_ids() == ["CAL-V005"]
    desk.star_list.filter_edit.clear()
    desk.star_list.status_box.setCurrentIndex(desk.star_list.status_box.findData("rejected"))
    assert desk.visible_star_ids() == ["CAL-V001"]
    assert "1 of 6 shown" in desk.star_list.counts_label.text()


def test_exclude_points_with_a_selection(desk, qtbot):
    lc_panel = desk.lightcurve
    x = np.asarray(desk.desk.lc.time) - lc_panel.t0
    rect = QRectF(QPointF(-1.0, 10.0), QPointF(float(np.median(x)), 20.0))
    inside = lc_panel.points_in(rect)
    assert 0 < inside.size < desk.desk.lc.n_points
    lc_panel.vb.sigRectSelected.emit(rect, False)  # what a Shift+drag emits
    mask = desk.ledger.excluded("CAL-V001")
    assert mask[inside].all() and mask.sum() == inside.size
    assert desk.ledger.result("CAL-V001").stale  # until the re-analysis is stored
    qtbot.waitUntil(lambda: not desk.ledger.result("CAL-V001").stale, timeout=20000)
    stored = desk.ledger.result("CAL-V001").result
    assert stored["n_good"] == desk.desk.lc.n_points - inside.size
    qtbot.waitUntil(lambda: desk.desk.result.get("n_good") == stored["n_good"])
    assert len(lc_panel.excluded.getData()[0]) == inside.size
    # Ctrl on release restores
    lc_panel.vb.sigRectSelected.emit(rect, True)
    assert not desk.ledger.excluded("CAL-V001").any()
    # undo brings the exclusion back, in the ledger and on screen
    desk.workers.wait(10000)
    qtbot.keyClick(desk, Qt.Key.Key_Z, Qt.KeyboardModifier.ControlModifier)
    assert desk.ledger.excluded("CAL-V001").sum() == inside.size
    assert len(desk.lightcurve.excluded.getData()[0]) == inside.size
    desk.workers.wait(10000)


def test_export_and_plots(desk, qtbot, tmp_path):
    from astropy.table import Table

    qtbot.keyClick(desk, Qt.Key.Key_Y)  # confirm CAL-V001
    qtbot.keyClick(desk, Qt.Key.Key_3)  # relabel CAL-V002 as RRd
    done = []
    desk.files.export_catalogue(tmp_path / "vetted.ecsv", "ecsv", on_done=done.append)
    qtbot.waitUntil(lambda: bool(done), timeout=20000)
    assert done == [2]  # core.export.write_catalogue returns the number of stars
    table = Table.read(tmp_path / "vetted.ecsv", format="ascii.ecsv")
    rows = {str(r["star_id"]): r for r in table}
    assert set(rows) == {"CAL-V001", "CAL-V002"}
    assert str(rows["CAL-V002"]["class"]) == "RRd"
    for which in ("lightcurve", "periodogram", "fold"):
        png = desk.files.export_plot(which, tmp_path / f"{which}.png")
        assert png.stat().st_size > 5000
    svg = desk.files.export_plot("fold", tmp_path / "fold.svg")
    assert "<svg" in svg.read_text()[:2000]


def test_shortcut_sheet_lists_standard_and_own_keys(desk):
    desk.show_shortcuts()
    table = desk.shortcut_sheet.table
    texts = {table.item(i, 1).text(): table.item(i, 2).text() for i in range(table.rowCount())}
    undo = next(v for k, v in texts.items() if k.startswith("Undo"))
    assert undo  # QKeySequence.Undo on this platform
    assert texts["Confirm suggestion"].startswith("Y")
    assert "Next candidate" in texts
    desk.shortcut_sheet.close()


def test_layout_and_recent_files_persist(desk, qsettings):
    desk.main_splitter.setSizes([300, 900, 400])
    sizes = desk.main_splitter.sizes()
    desk.save_layout()
    again = MainWindow(settings=qsettings)
    again.resize(desk.size())
    again.show()
    assert again.main_splitter.sizes() == sizes
    again.files.fill_recent()
    assert [a.text() for a in again.files.recent_menu.actions()] == [str(desk.ledger_path)]
    dispose(again)


def test_analysis_settings_change_the_periodogram(desk, qtbot, monkeypatch):
    from phasewise.app.desk import dialogs

    before = len(desk.periodogram.view.frequency)
    monkeypatch.setattr(dialogs.AnalysisSettingsDialog, "exec", lambda self: True)
    monkeypatch.setattr(
        dialogs.AnalysisSettingsDialog,
        "changes",
        lambda self: {"method": "gls", "fmin": None, "fmax": 10.0, "oversampling": 2, "nterms": 3},
    )
    desk.settings_dialog()
    assert desk.desk.settings.periodogram.oversampling == 2
    qtbot.waitUntil(lambda: desk.periodogram.view is not None, timeout=20000)
    after = desk.periodogram.view
    assert after.frequency.max() <= 10.0 + 1e-9 and len(after.frequency) < before / 5
    # results made with the old settings now show as stale once re-analysis records them
    assert "re-analyse" in desk.statusBar().currentMessage()


def test_desk_uses_the_settings_stored_in_the_ledger(qtbot, qsettings, subset_copy):
    from dataclasses import replace

    from phasewise.core.analysis import AnalysisSettings
    from phasewise.core.ledger import Ledger

    stored = AnalysisSettings()
    stored = replace(stored, periodogram=replace(stored.periodogram, fmax=12.0, oversampling=3))
    with Ledger.open(subset_copy) as ledger:
        ledger.set_analysis_settings(stored.to_dict(), stored.hash)
    window = MainWindow(settings=qsettings)
    try:
        window.open_ledger(subset_copy)
        window.show()
        qtbot.waitUntil(lambda: window.desk.settings is not None, timeout=10000)
        assert window.desk.settings.hash == stored.hash
        assert window.desk.settings.periodogram.fmax == 12.0
    finally:
        dispose(window)


def test_method_switch_and_axis_toggles(desk, qtbot):
    box = desk.periodogram.method_box
    box.setCurrentIndex(box.findData("pdm"))
    qtbot.waitUntil(
        lambda: desk.periodogram.view is not None and desk.periodogram.view.method == "pdm",
        timeout=20000,
    )
    assert desk.periodogram.view.fap_levels == ()  # no FAP lines for PDM
    assert desk.periodogram.candidates  # found on the PDM periodogram itself
    qtbot.keyClick(desk, Qt.Key.Key_F)  # against period
    x, _ = desk.periodogram.curve.getData()
    assert desk.periodogram.period_axis and np.all(np.diff(x) > 0)
    assert desk.periodogram.item.getAxis("bottom").labelText == "Period (d)"
    qtbot.keyClick(desk, Qt.Key.Key_G)  # log axis
    assert desk.periodogram.log_box.isChecked()
    marker = desk.periodogram.marker.value()
    assert marker == pytest.approx(np.log10(desk.session.period))
    # a click on a peak still picks it on a log period axis
    target = desk.periodogram.candidates[1]
    _click_plot(qtbot, desk.periodogram.plot, np.log10(target["period"]), 0.5 * target["power"])
    assert desk.session.period == pytest.approx(target["period"], rel=2e-3)


def test_points_in_polygon_matches_qt():
    from PySide6.QtCore import QPointF
    from PySide6.QtGui import QPainterPath, QPolygonF

    from phasewise.app.desk.plots import points_in_polygon

    rng = np.random.default_rng(5)
    x, y = rng.uniform(-1, 3, 400), rng.uniform(-1, 3, 400)
    star = np.array([[0, 0], [2, 0.4], [0.3, 0.8], [1.8, 2.2], [0.1, 1.9], [1.0, 1.0]])
    ours = points_in_polygon(x, y, star)
    # reference: Qt's QPainterPath with the even-odd fill rule
    path = QPainterPath()
    path.addPolygon(QPolygonF([QPointF(*p) for p in star]))
    path.closeSubpath()
    path.setFillRule(Qt.FillRule.OddEvenFill)
    ref = np.array([path.contains(QPointF(a, b)) for a, b in zip(x, y, strict=True)])
    assert 20 < ours.sum() < 380
    assert np.count_nonzero(ours != ref) <= 2  # points exactly on an edge may differ


def test_exclude_with_a_lasso(desk, qtbot):
    panel = desk.lightcurve
    x = np.asarray(desk.desk.lc.time) - panel.t0
    x0, x1 = float(np.percentile(x, 10)), float(np.percentile(x, 40))
    lasso = np.array([[x0, 10.0], [x1, 10.0], [x1, 20.0], [x0, 20.0]])
    panel.lasso_box.setChecked(True)
    assert panel.vb.lasso
    panel.vb.sigLassoSelected.emit(lasso, False)
    mask = desk.ledger.excluded("CAL-V001")
    expected = (x >= x0) & (x <= x1)
    assert mask.sum() == expected.sum() and mask[expected].all()
    desk.workers.wait(10000)


@pytest.mark.slow
def test_reanalyse_all_in_worker_processes_keeps_verdicts(desk, qtbot):
    qtbot.keyClick(desk, Qt.Key.Key_Y)
    before = {sid: desk.ledger.result(sid).computed_at for sid in desk.ledger.star_ids()}
    worker = desk.reanalysis.run("all")
    qtbot.waitUntil(lambda: worker.done.is_set(), timeout=60000)
    qtbot.waitUntil(lambda: not desk.workers.busy, timeout=10000)
    after = {sid: desk.ledger.result(sid).computed_at for sid in desk.ledger.star_ids()}
    assert all(after[sid] >= before[sid] for sid in before) and len(after) == 6
    assert desk.ledger.verdict("CAL-V001").status == "confirmed"
    stored = desk.ledger.result("CAL-V003")
    assert stored is not None and not stored.stale  # stored with the recorded settings


def test_holding_next_star_skips_stale_periodograms(desk, qtbot):
    for _ in range(5):
        qtbot.keyClick(desk, Qt.Key.Key_J)
    assert desk.current_star == "CAL-V006"
    desk.wait_idle()
    assert desk.periodogram.view is not None
    # the periodogram shown is the current star's (cached under its id)
    key = next(k for k, v in desk.desk._periodograms.items() if v is desk.periodogram.view)
    assert key[0] == "CAL-V006"


def test_confirm_records_the_suggestions_period_unless_changed_by_hand(desk, qtbot):
    # an eclipsing-style suggestion proposes twice the periodogram's period
    analysed = desk.session.period
    desk.desk.result["suggestions"][0]["period"] = 2 * analysed
    desk.sheet.show_trial()
    assert "Confirm records the suggestion" in desk.sheet.trial_label.text()
    qtbot.keyClick(desk, Qt.Key.Key_Y)
    assert desk.ledger.verdict("CAL-V001").period == pytest.approx(2 * analysed)
    # a period set by hand wins
    assert desk.current_star == "CAL-V002"
    qtbot.keyClick(desk, Qt.Key.Key_Period)
    nudged = desk.session.period
    qtbot.keyClick(desk, Qt.Key.Key_Y)
    assert desk.ledger.verdict("CAL-V002").period == pytest.approx(nudged)


def test_a_constant_star_gets_no_period(desk, qtbot):
    rows = {
        sid: desk.star_list.model.value(sid, "suggested_class") for sid in desk.ledger.star_ids()
    }
    constant = next((sid for sid, code in rows.items() if code == "CONST"), None)
    if constant is not None:  # confirming a CONST suggestion
        desk.select_star(constant)
        qtbot.keyClick(desk, Qt.Key.Key_Y)
        v = desk.ledger.verdict(constant)
        assert (v.status, v.class_code, v.period) == ("confirmed", "CONST", None)
    # relabelling any star as CONST
    desk.select_star("CAL-V001")
    desk.relabel("CONST")
    v = desk.ledger.verdict("CAL-V001")
    assert (v.status, v.class_code, v.period) == ("relabelled", "CONST", None)


def test_fold_of_too_few_points_shows_them_without_a_model(qtbot):
    from phasewise.app.desk.fold_panel import FoldView
    from phasewise.core.desk import DeskModel
    from phasewise.core.lightcurve import LightCurve

    view = FoldView(DeskModel())
    qtbot.addWidget(view)
    t = np.array([0.0, 0.3, 0.7, 1.1, 1.6])
    view.set_star(LightCurve("X", t, np.full(5, 15.0), np.full(5, 0.02)), "V")
    view.set_period(0.5)
    assert sum(len(b.getData()[0]) for b in view.bins) == 5
    x_model, _ = view.model_curve.getData()
    assert view.fit is None and (x_model is None or len(x_model) == 0)


@pytest.mark.slow
def test_analyse_only_stars_without_a_fresh_result(desk, qtbot):
    import dataclasses

    assert desk.reanalysis.run("stale") is None
    assert desk.statusBar().currentMessage() == "Every star has a fresh result."
    assert not desk.desk.read_only  # the ledger was taken back
    desk.desk.use_settings(dataclasses.replace(desk.desk.analysis_settings(), fap_threshold=0.01))
    worker = desk.reanalysis.run("stale")  # other settings: all six are stale
    qtbot.waitUntil(lambda: worker.done.is_set(), timeout=60000)
    desk.wait_idle()
    assert all(not desk.ledger.result(sid).stale for sid in desk.ledger.star_ids())
    model = desk.star_list.model
    assert not any(model.line(s)[9] for s in model.star_ids())  # no "stale" left in the list
