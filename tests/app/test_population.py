"""Population view: points per class, click, brushing, filters, export (pytest-qt, offscreen)."""

import numpy as np
import pytest

pytest.importorskip("pytestqt")
from PySide6 import QtCore, QtGui, QtWidgets  # noqa: E402
from PySide6.QtTest import QTest  # noqa: E402

from phasewise.app.population import PopulationView  # noqa: E402
from phasewise.core import diagrams as dg  # noqa: E402
from phasewise.core.errors import PhasewiseError  # noqa: E402

from .population_fakes import build_ledger  # noqa: E402


@pytest.fixture(scope="module")
def ledger(tmp_path_factory):
    ledger = build_ledger(tmp_path_factory.mktemp("population") / "nyx.ledger.sqlite")
    yield ledger
    ledger.close()


@pytest.fixture(scope="module")
def shared_view(qapp, ledger):
    """One window for the module (building one takes most of a test's time)."""
    widget = PopulationView(ledger)
    widget.resize(1500, 850)
    widget.show()
    qapp.processEvents()
    yield widget
    widget.close()
    widget.deleteLater()
    qapp.processEvents()


@pytest.fixture
def view(shared_view, qtbot):
    """The shared window, reset to its state after loading."""
    qtbot.waitExposed(shared_view)
    shared_view.brush_button.setChecked(False)
    shared_view.set_extinction(0.0)
    shared_view.set_visible_stars(None)
    shared_view.set_selected_stars([])
    shared_view.set_current_star(None)
    shared_view.refresh()
    shared_view.reset_zoom()
    qtbot.waitUntil(lambda: shared_view.summary_ready, timeout=20000)
    return shared_view


def _expected_counts(ledger, coordinates):
    """Count per class of the stars whose stored result has the diagram's coordinates."""
    counts = {}
    for verdict in ledger.verdicts():
        result = ledger.result(verdict.star_id).result
        if coordinates(result):
            code = (
                verdict.class_code
                if verdict.status in ("confirmed", "relabelled") and verdict.class_code
                else "REJECTED"
                if verdict.status == "rejected"
                else result["suggestions"][0]["class"]
            )
            counts[code] = counts.get(code, 0) + 1
    return counts


def test_each_diagram_shows_one_point_per_star_per_class(view, ledger):
    def has_amp(r):
        return "V" in r.get("amplitude_by_band", {}) and r["period"]

    assert view.plots["period_amplitude"].shown_counts() == _expected_counts(ledger, has_amp)
    assert view.plots["r21_logp"].shown_counts() == _expected_counts(
        ledger, lambda r: r.get("fourier", {}).get("R21") is not None
    )
    ratio = view.plots["period_ratio"].shown_counts()
    assert ratio == _expected_counts(ledger, lambda r: bool(r.get("secondary_periods")))
    assert ratio == {"RRd": 4}
    cmd = view.plots["colour_magnitude"].shown_counts()
    assert cmd == _expected_counts(
        ledger, lambda r: {"V", "I"} <= set(r.get("mean_mag_by_band", {}))
    )
    # the relabelled star is drawn in its verdict class, the rejected one as REJECTED
    pa = view.plots["period_amplitude"].diagram
    assert pa.class_codes[pa.star_ids.index("NX-C00")] == "RRd"
    assert pa.class_codes[pa.star_ids.index("NX-C01")] == "REJECTED"


def test_clicking_a_point_selects_its_star(view, qtbot):
    plot = view.plots["period_amplitude"]
    diagram = plot.diagram
    index = diagram.star_ids.index("NX-AB07")
    pos = plot.data_to_widget(diagram.x[index], diagram.y[index])
    with qtbot.waitSignal(view.star_selected, timeout=2000) as blocker:
        QTest.mouseClick(plot.viewport(), QtCore.Qt.MouseButton.LeftButton, pos=pos)
    assert blocker.args == ["NX-AB07"]
    assert plot.current_mark.data["x"].tolist() == [diagram.x[index]]


def _drag(qtbot, widget, start, end, modifiers):
    QTest.mousePress(widget, QtCore.Qt.MouseButton.LeftButton, modifiers, start)
    for k in range(1, 9):
        point = start + (end - start) * (k / 8)
        event = QtGui.QMouseEvent(
            QtCore.QEvent.Type.MouseMove,
            QtCore.QPointF(point),
            QtCore.QPointF(widget.mapToGlobal(point)),
            QtCore.Qt.MouseButton.NoButton,
            QtCore.Qt.MouseButton.LeftButton,
            modifiers,
        )
        QtWidgets.QApplication.sendEvent(widget, event)
        qtbot.wait(25)  # pyqtgraph rate-limits mouse moves
    QTest.mouseRelease(widget, QtCore.Qt.MouseButton.LeftButton, modifiers, end)


def test_brushing_a_rectangle_selects_the_stars_inside(view, qtbot):
    plot = view.plots["period_amplitude"]
    diagram = plot.diagram
    # a rectangle around the RRc group (short periods, low amplitude)
    x_range, y_range = (-0.62, -0.40), (0.25, 0.65)
    expected = sorted(diagram.inside(x_range, y_range))
    assert 10 <= len(expected) < len(diagram)  # a real subset
    start = plot.data_to_widget(x_range[0], y_range[1])
    end = plot.data_to_widget(x_range[1], y_range[0])
    shift = QtCore.Qt.KeyboardModifier.ShiftModifier
    with qtbot.waitSignal(view.stars_brushed, timeout=3000) as blocker:
        _drag(qtbot, plot.viewport(), start, end, shift)
    # pixel rounding of the rectangle's corners: compare with the ids it really covers
    got = sorted(blocker.args[0])
    assert set(got) >= {s for s in expected if _well_inside(diagram, s, x_range, y_range)}
    assert set(got) <= set(diagram.inside((-0.63, -0.39), (0.24, 0.66)))
    assert view.selected_stars() == set(got)
    # the selection shows in the other diagrams too
    assert len(view.plots["r21_logp"].selected_marks.data) == len(
        [s for s in got if s in view.plots["r21_logp"].diagram.star_ids]
    )


def _well_inside(diagram, star_id, x_range, y_range, margin=0.01):
    i = diagram.star_ids.index(star_id)
    return (
        x_range[0] + margin < diagram.x[i] < x_range[1] - margin
        and y_range[0] + margin < diagram.y[i] < y_range[1] - margin
    )


def test_brush_mode_selects_without_shift(view, qtbot):
    view.brush_button.setChecked(True)
    plot = view.plots["r21_logp"]
    diagram = plot.diagram
    x_range, y_range = (-0.6, -0.4), (0.0, 0.3)
    start = plot.data_to_widget(x_range[0], y_range[1])
    end = plot.data_to_widget(x_range[1], y_range[0])
    with qtbot.waitSignal(view.stars_brushed, timeout=3000) as blocker:
        _drag(qtbot, plot.viewport(), start, end, QtCore.Qt.KeyboardModifier.NoModifier)
    got = set(blocker.args[0])
    assert got >= {
        s for s in diagram.inside(x_range, y_range) if _well_inside(diagram, s, x_range, y_range)
    }
    assert got <= set(diagram.inside((-0.61, -0.39), (-0.01, 0.31)))
    assert any(s.startswith("NX-C") for s in got) and not any(s.startswith("NX-AB") for s in got)
    # without brush mode, a plain drag pans and selects nothing
    view.brush_button.setChecked(False)
    x_before = plot.getPlotItem().getViewBox().viewRange()[0]
    with qtbot.assertNotEmitted(view.stars_brushed):
        _drag(qtbot, plot.viewport(), start, end, QtCore.Qt.KeyboardModifier.NoModifier)
    assert plot.getPlotItem().getViewBox().viewRange()[0] != x_before


def test_list_filter_applies_to_the_diagrams(view, ledger):
    rrc = [v.star_id for v in ledger.verdicts() if v.star_id.startswith("NX-C")]
    view.set_visible_stars(rrc)
    shown = view.plots["period_amplitude"].shown_star_ids()
    assert set(shown) == set(rrc)
    view.set_visible_stars(None)
    assert len(view.plots["period_amplitude"].shown_star_ids()) == len(
        view.plots["period_amplitude"].diagram
    )


def test_current_star_is_ringed_in_every_diagram_that_has_it(view):
    view.set_current_star("NX-AB03")
    for key in ("period_amplitude", "phi31_logp", "r21_logp", "period_luminosity"):
        assert len(view.plots[key].current_mark.data) == 1, key
    assert len(view.plots["period_ratio"].current_mark.data) == 0


def test_outlier_is_flagged_and_reported(view, qtbot):
    reasons = view.outlier_reasons()
    assert set(reasons) == {"NX-ODD"}
    assert "RRab locus" in reasons["NX-ODD"]
    assert "MAD" in view.summary_panel.plain_text()
    with qtbot.waitSignal(view.outliers_changed, timeout=2000) as blocker:
        view.refresh()
    assert set(blocker.args[0]) == {"NX-ODD"}


def test_export_png_and_svg_with_labels(view, tmp_path):
    png = view.export_diagram("period_amplitude", tmp_path / "pa.png")
    image = QtGui.QImage(str(png))
    assert image.width() == 2400 and image.height() > 1000
    svg = view.export_diagram("period_luminosity", tmp_path / "pl.svg").read_text()
    assert "log₁₀ P [d]" in svg and "mean V [mag]" in svg
    assert "RRab" in svg  # the class legend is part of the exported figure
    files = view.export_all(tmp_path / "all", width_px=600)
    assert len(files) == 12 and all(f.stat().st_size > 0 for f in files)
    with pytest.raises(PhasewiseError, match=r"pa\.pdf.*use \.png or \.svg"):
        view.export_diagram("period_amplitude", tmp_path / "pa.pdf")


def _members_as_core_sees_them(ledger, ebv):
    """The same members, derived and summarised by core.physics directly."""
    from phasewise.core import physics

    points = dg.summary_members(dg.star_points(ledger))
    stars = dg.star_physics(points, physics.PhysicsSettings(ebv=ebv))
    return physics.population_summary(stars)


def test_summary_distance_modulus_equals_core(view, ledger):
    shown = view.field.summary
    expected = _members_as_core_sees_them(ledger, 0.0)
    for code in ("RRab", "RRc", "DCEP"):
        got = next(d for d in shown.distances if d.class_code == code)
        want = next(d for d in expected.distances if d.class_code == code)
        assert got.mu0 == pytest.approx(want.mu0, abs=1e-12)
        assert got.mu0_err == pytest.approx(want.mu0_err, abs=1e-12)
        assert f"{want.mu0:.3f} ± {want.mu0_err:.3f}" in view.summary_panel.plain_text()
    # rejected and UNKNOWN stars are not members
    assert shown.n_stars == 59
    assert shown.oosterhoff == expected.oosterhoff == "Oo I"  # mean RRab period ~0.58 d
    assert shown.rrc_fraction == pytest.approx(13 / (31 + 13))


def test_editing_the_extinction_recomputes_the_distances(view, ledger, qtbot):
    before = view.field.summary
    rrab_before = next(d for d in before.distances if d.class_code == "RRab").mu0
    with qtbot.waitSignal(view.summary_updated, timeout=20000):
        view.summary_panel.ebv_box.setValue(0.1)
    assert view.extinction() == pytest.approx(0.1)
    after = view.field.summary
    rrab_after = next(d for d in after.distances if d.class_code == "RRab").mu0
    # A_V = 3.1 E(B-V) (Cardelli, Clayton & Mathis 1989): mu0 is 0.31 mag smaller
    assert rrab_before - rrab_after == pytest.approx(0.31, abs=1e-9)
    expected = _members_as_core_sees_them(ledger, 0.1)
    want = next(d for d in expected.distances if d.class_code == "RRab")
    assert rrab_after == pytest.approx(want.mu0, abs=1e-12)
    assert "E(B−V) = 0.100" in view.summary_panel.plain_text()
    # the guide lines moved with it: the strip by A_V in V
    assert view.field.a_v == pytest.approx(0.31)
    assert view.plots["colour_magnitude"].lines[0].yData[0] == pytest.approx(
        -6.0 + rrab_after + 0.31
    )


def test_caution_and_rules_are_stated(view):
    text = view.summary_panel.plain_text()
    assert "from memory" in text.lower()
    assert "Outlier rule" in text
    assert "the astronomer decides" in view.summary_panel.caution.text()


def test_a_new_verdict_moves_the_star_after_refresh(view, ledger, qtbot):
    plot = view.plots["period_amplitude"]
    before = plot.shown_counts()
    ledger.set_verdict("NX-AB05", "relabelled", class_code="RRc")
    try:
        view.refresh()
        after = plot.shown_counts()
        assert after["RRab"] == before["RRab"] - 1
        assert after["RRc"] == before["RRc"] + 1
        diagram = plot.diagram
        assert diagram.class_codes[diagram.star_ids.index("NX-AB05")] == "RRc"
    finally:
        ledger.undo()
        view.refresh()
    assert plot.shown_counts() == before


def test_extinction_starts_from_the_ledgers_analysis_settings(qtbot, tmp_path):
    ledger = build_ledger(tmp_path / "reddened.ledger.sqlite")
    ledger.set_analysis_settings({"physics": {"ebv": 0.12, "rv": 3.1}}, "with-ebv")
    try:
        widget = PopulationView(ledger)
        qtbot.addWidget(widget)
        assert widget.points == []  # a hidden view reads the ledger when first shown
        widget.show()
        qtbot.waitUntil(lambda: widget.summary_ready, timeout=20000)
        assert widget.extinction() == pytest.approx(0.12)
        # A_V = 3.1 E(B-V) (Cardelli, Clayton & Mathis 1989)
        assert widget.field.a_v == pytest.approx(0.372)
    finally:
        widget.close()
        ledger.close()


def test_each_class_style_is_one_item_and_no_point_is_hidden(view):
    from phasewise.app.population.style import class_style

    for key, plot in view.plots.items():
        diagram = plot.diagram
        finite = [
            sid
            for sid, x, y in zip(diagram.star_ids, diagram.x, diagram.y, strict=True)
            if np.isfinite(x) and np.isfinite(y)
        ]
        assert sorted(plot.shown_star_ids()) == sorted(finite), key
        code_of = dict(zip(diagram.star_ids, diagram.class_codes, strict=True))
        drawn = []
        for item in plot.class_items():
            ids = [str(s) for s in item.data["data"]]
            drawn += ids
            x, y = item.getData()
            index = {sid: i for i, sid in enumerate(diagram.star_ids)}
            assert np.array_equal(x, diagram.x[[index[s] for s in ids]]), key
            assert np.array_equal(y, diagram.y[[index[s] for s in ids]]), key
            styles = {class_style(code_of[s]) for s in ids}
            # every point of an item has the item's own symbol, size and colour
            assert {(s.symbol, s.size, s.colour) for s in styles} == {
                (item.opts["symbol"], item.opts["size"], item.opts["brush"].color().name().upper())
            }, key
        assert sorted(drawn) == sorted(plot.shown_star_ids()), key


def test_one_style_scatter_draws_what_pyqtgraph_draws(qapp):
    import pyqtgraph as pg

    from phasewise.app.population.plot import OneStyleScatter

    rng = np.random.default_rng(4)
    x, y = rng.normal(size=300), rng.normal(size=300)
    images, rects = [], []
    for kind in (pg.ScatterPlotItem, OneStyleScatter):
        widget = pg.PlotWidget(background="w")
        widget.resize(300, 260)
        item = kind(pxMode=True, symbol="t1", size=8.0, brush=pg.mkBrush("#D55E00"), pen=None)
        item.setData(x=x, y=y)
        widget.addItem(item)
        widget.setRange(xRange=(-3, 3), yRange=(-3, 3), padding=0)
        widget.show()
        qapp.processEvents()
        rects.append(item.data["sourceRect"].copy())
        images.append(widget.grab().toImage())
        widget.close()
    # pyqtgraph's own per-point look-up is the reference
    assert np.array_equal(rects[0], rects[1])
    assert images[0] == images[1]
