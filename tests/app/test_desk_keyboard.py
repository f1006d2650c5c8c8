"""Keyboard-first vetting (pytest-qt, offscreen): every key press as a person makes it."""

from __future__ import annotations

import numpy as np
import pytest
from PySide6.QtCore import QPointF, Qt
from PySide6.QtWidgets import QApplication

from phasewise.core.classes import CLASS_CODES, CLASSES

from .desk_fixtures import desk_window  # noqa: F401  (the "desk" fixture)


def _key(qtbot, desk, key, modifier=Qt.KeyboardModifier.NoModifier):
    """Press a key where the keyboard focus is (as a person would)."""
    qtbot.keyClick(QApplication.focusWidget() or desk, key, modifier)


def _drag(widget, points) -> None:
    """A left-button drag through ``points`` (QTest's mouseMove carries no button)."""
    from PySide6.QtGui import QMouseEvent
    from PySide6.QtTest import QTest

    def send(kind, pos, button, buttons):
        p = QPointF(pos)
        event = QMouseEvent(
            kind,
            p,
            QPointF(widget.mapToGlobal(p.toPoint())),
            button,
            buttons,
            Qt.KeyboardModifier.NoModifier,
        )
        QApplication.sendEvent(widget, event)

    left, none = Qt.MouseButton.LeftButton, Qt.MouseButton.NoButton
    send(QMouseEvent.Type.MouseButtonPress, points[0], left, left)
    for a, b in zip(points[:-1], points[1:], strict=True):
        for f in np.linspace(0.1, 1.0, 10):  # small steps: the scene starts a drag late
            QTest.qWait(20)  # the scene rate-limits move events
            send(QMouseEvent.Type.MouseMove, (1 - f) * QPointF(a) + f * QPointF(b), none, left)
    send(QMouseEvent.Type.MouseButtonRelease, points[-1], left, none)


def test_focus_leaves_the_filter_box_on_enter_and_escape(desk, qtbot):
    desk.activateWindow()
    assert not desk.star_list.filter_edit.hasFocus()  # the plots have it after opening
    for leave in (Qt.Key.Key_Return, Qt.Key.Key_Escape):
        desk.acts["find"].trigger()
        assert desk.star_list.filter_edit.hasFocus()
        qtbot.keyClicks(desk.star_list.filter_edit, "CAL")
        qtbot.keyClick(desk.star_list.filter_edit, leave)
        assert not desk.star_list.filter_edit.hasFocus()
        assert desk.fold.main.hasFocus()
        before = desk.current_star
        _key(qtbot, desk, Qt.Key.Key_J)  # goes to the next star, types nothing
        assert desk.current_star != before
        assert "J" not in desk.star_list.filter_edit.text().upper().replace("CAL", "")
        desk.star_list.filter_edit.clear()


def test_every_class_can_be_recorded_from_the_keyboard(desk, qtbot):
    """L opens the class picker; typing the code and Enter records a relabel verdict.

    Every class code in turn on one star, in one window (a window per class
    cost the quick suite ~20 s).
    """
    desk.acts["advance"].setChecked(False)
    star = desk.current_star
    for code in CLASS_CODES:
        # the closed picker handed the keyboard back to the plots of an active window
        desk.activateWindow()
        qtbot.waitUntil(lambda: QApplication.activeWindow() is desk, timeout=3000)
        desk.focus_plots()
        _key(qtbot, desk, Qt.Key.Key_L)
        picker = desk.class_picker
        assert picker.isVisible(), code
        qtbot.waitUntil(picker.typed.hasFocus, timeout=3000)
        qtbot.keyClicks(picker.typed, code)
        qtbot.keyClick(picker.typed, Qt.Key.Key_Return)
        verdict = desk.ledger.verdict(star)
        assert (verdict.status, verdict.class_code) == ("relabelled", code)
        if CLASSES[code].periodic:
            assert verdict.period == pytest.approx(desk.session.period), code
        else:
            assert verdict.period is None, code
        # recorded through the catalogue's verdict policy: final numbers are stored with it
        assert verdict.final is not None and verdict.final["class"] == code
        assert not picker.isVisible(), code
        assert desk.focusWidget() is desk.fold.main, code  # the window's keyboard focus
    assert desk.current_star == star


def test_escape_in_the_class_picker_records_nothing(desk, qtbot):
    star = desk.current_star
    before = desk.ledger.verdict(star).status
    desk.pick_class()
    qtbot.keyClicks(desk.class_picker.typed, "EW")
    qtbot.keyClick(desk.class_picker.typed, Qt.Key.Key_Escape)
    assert desk.ledger.verdict(star).status == before


def test_lasso_works_without_the_select_toggle(desk, qtbot):
    lcp = desk.lightcurve
    assert not lcp.select_box.isChecked()
    lcp.lasso_box.setChecked(True)
    x, y = np.asarray(desk.desk.lc.time) - lcp.t0, np.asarray(desk.desk.lc.mag)
    # a faint point mid-plot: off the axes and away from the legend (top right)
    good = np.flatnonzero(desk.desk.lc.good)
    good = good[y[good] > np.median(y[good])]
    i = int(good[np.argmin(np.abs(x[good] - np.median(x[good])))])
    vb = lcp.vb
    (x0, x1), (y0, y1) = vb.viewRange()
    dx, dy = 0.03 * (x1 - x0), 0.03 * (y1 - y0)
    corners = [(x[i] - dx, y[i] - dy), (x[i] + dx, y[i] - dy), (x[i] + dx, y[i] + dy)]
    corners.append((x[i] - dx, y[i] + dy))
    view = lcp.plot
    positions = [view.mapFromScene(vb.mapViewToScene(QPointF(*c))) for c in corners]
    view.scene().minDragTime = 0  # a drag from the first move, however fast the machine
    with qtbot.waitSignal(lcp.exclusionRequested, timeout=3000) as signal:
        _drag(view.viewport(), positions + positions[:1])
    assert i in set(signal.args[0]) and signal.args[1]


@pytest.mark.parametrize("back", ["reset_action", "backspace"])
def test_verdict_label_follows_the_trial_period_and_reset(desk, qtbot, back):
    desk.activateWindow()
    desk.focus_plots()
    analysed = desk.session.period
    _key(qtbot, desk, Qt.Key.Key_Period)  # a small nudge
    moved = desk.session.period
    assert moved != analysed
    label = desk.sheet.trial_label.text()
    assert f"{moved:.7f}" in label and "changed by hand" in label
    if back == "backspace":
        _key(qtbot, desk, Qt.Key.Key_Backspace)
    else:
        desk.fold.action.emit("reset")
    assert desk.session.period == analysed
    label = desk.sheet.trial_label.text()
    assert f"{analysed:.7f}" in label and "changed by hand" not in label


def test_a_read_only_ledger_opens_read_only_with_verdicts_off(
    qtbot, qsettings, subset_copy, monkeypatch
):
    """Storage that cannot be written (as a root test cannot make a folder read-only, the
    ledger's own writability check says so): the desk opens it read-only and says so."""
    from phasewise.app.desk import MainWindow
    from phasewise.core import ledger as ledger_module

    from .conftest import dispose

    monkeypatch.setattr(ledger_module, "_writable", lambda path: False)
    window = MainWindow(settings=qsettings)
    try:
        window.open_ledger(subset_copy)
        window.show()
        assert window.ledger.readonly and "read-only" in window.windowTitle()
        assert window.read_only_label.isVisible()
        for action in (
            window.acts["confirm"],
            window.acts["relabel"],
            window.acts["reject"],
            window.acts["undo"],
            *window.class_actions,
        ):
            assert not action.isEnabled()
        assert not window.sheet.confirm_button.isEnabled()
        star = window.current_star
        window.set_verdict("rejected")  # even if asked directly, nothing is written
        assert window.ledger.verdict(star).status == "unreviewed"
        assert "Read-only" in window.statusBar().currentMessage()
    finally:
        window.close_ledger()
        dispose(window)


def test_the_shortcut_sheet_lists_the_digit_keys(desk):
    desk.show_shortcuts()
    table = desk.shortcut_sheet.table
    keys = {table.item(r, 2).text() for r in range(table.rowCount())}
    texts = {table.item(r, 1).text() for r in range(table.rowCount())}
    assert {str(d) for d in range(10)} <= keys
    assert "Relabel as RRab" in texts and "Periodogram: whole grid / candidates" in texts
    desk.shortcut_sheet.close()
