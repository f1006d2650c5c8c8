"""The fold draws the analysis model; no point is ever off-scale (pytest-qt, offscreen).

Stars are demo stars analysed by core.analysis; the one outlier below is
injected, and what is checked is that the injected point stays in view.
"""

from __future__ import annotations

import numpy as np
import pytest
from PySide6.QtCore import QRectF

from phasewise.app.desk import MainWindow

from .conftest import ROOT, dispose
from .desk_fixtures import desk_window  # noqa: F401  (the "desk" fixture)

OUTLIER_STAR = "CAL-V003"
#: Magnitudes added to one point: far beyond the star's ~0.5 mag amplitude.
OUTLIER_OFFSET = 6.0


@pytest.fixture
def outlier_desk(qtbot, qsettings, tmp_path):
    """A window on one analysed demo star with one point made 6 mag too faint."""
    from phasewise.core.analysis import AnalysisSettings, analyse
    from phasewise.core.io import open_photometry
    from phasewise.core.ledger import Ledger
    from phasewise.core.lightcurve import LightCurve
    from phasewise.core.settings import settings_hash, settings_to_dict

    lc = open_photometry(ROOT / "demo_data" / "stars").star(OUTLIER_STAR)
    in_v = np.flatnonzero(lc.good & (np.asarray(lc.band) == "V"))  # the band the fold shows
    i = int(in_v[in_v.size // 2])
    mag = np.array(lc.mag)
    mag[i] += OUTLIER_OFFSET
    lc = LightCurve(
        lc.star_id, lc.time, mag, lc.mag_err, lc.band, lc.time_scale, lc.excluded, lc.meta
    )
    settings = AnalysisSettings()
    path = tmp_path / "outlier.ledger.sqlite"
    ledger = Ledger.create(path)
    ledger.set_analysis_settings(settings_to_dict(settings), settings_hash(settings))
    ledger.add_stars([lc], source_file="test")
    ledger.store_results([(lc.star_id, settings_hash(settings), analyse(lc, settings).to_dict())])
    ledger.close()
    window = MainWindow(settings=qsettings)
    window.open_ledger(path)
    window.show()
    qtbot.waitUntil(lambda: window.fold.main.model is not None, timeout=10000)
    yield window, i, float(mag[i])
    dispose(window)


def _inside(view_range, value) -> bool:
    lo, hi = sorted(view_range)
    return lo < value < hi


def test_outlier_far_outside_the_bulk_is_in_view_and_selectable(outlier_desk, qtbot):
    window, index, outlier_mag = outlier_desk
    lcp = window.lightcurve
    x_range, y_range = lcp.vb.viewRange()
    x = float(window.desk.lc.time[index]) - lcp.t0
    assert _inside(y_range, outlier_mag) and _inside(x_range, x)
    # the fold shows it too (the analysis set it aside: a red circle)
    fold = window.fold.main
    assert _inside(fold.fold.getViewBox().viewRange()[1], outlier_mag)
    assert outlier_mag in fold.set_aside.getData()[1]
    # a rectangle drawn around it in the light curve reaches it, and only it
    with qtbot.waitSignal(lcp.exclusionRequested) as signal:
        lcp.select_rect(QRectF(x - 0.5, outlier_mag - 0.5, 1.0, 1.0))
    indices, exclude = signal.args
    assert list(indices) == [index] and exclude


def test_fold_line_is_the_core_model_at_the_trial_period(desk, qtbot):
    """At the analysed period the line is the analysis's own Fourier fit; nudged, it is
    core.folding.fold_model at the new period (never a fit of the panel's own)."""
    from phasewise.core.analysis import analyse
    from phasewise.core.folding import fold_model

    desk.wait_idle()
    fold = desk.fold.main
    lc, settings, band = desk.desk.lc, desk.desk.analysis_settings(), fold.band
    x, y = fold.model_curve.getData()
    # the analysis itself, run again here: its primary fit drawn over the same phases
    fit = analyse(lc, settings).primary_fit
    assert fit is not None and band == desk.desk.result["primary_band"]
    np.testing.assert_allclose(y, fit.model(fold.model.epoch + x * fold.period), atol=1e-9)
    assert f"rms {fit.residual_std:.3f}" in fold.fold.titleLabel.text
    desk.session.nudge(+1, large=True)
    # the points move at once; the line follows when the period rests
    line_x = fold.model_curve.getData()[0]
    assert fold.busy and (line_x is None or len(line_x) == 0)
    assert fold.bins[0].getData()[0].size > 0
    qtbot.waitUntil(lambda: not fold.busy, timeout=5000)
    expected = fold_model(lc, desk.session.period, settings, band, result=desk.desk.result)
    x, y = fold.model_curve.getData()
    np.testing.assert_allclose(x, expected.phase_grid)
    np.testing.assert_allclose(y, expected.model_grid)
    # the residual panel follows: every residual inside its range
    lo, hi = fold.resid.getViewBox().viewRange()[1]
    r = expected.residual[np.isfinite(expected.residual)]
    assert lo <= r.min() and r.max() <= hi


def test_excluded_and_set_aside_points_are_drawn_apart(outlier_desk, qtbot):
    window, index, outlier_mag = outlier_desk
    others = np.flatnonzero(window.desk.lc.good & (np.asarray(window.desk.lc.band) == "V"))[:3]
    window.reanalysis.exclude(others, True)
    window.wait_idle()
    qtbot.waitUntil(lambda: window.fold.main.excluded.getData()[0].size > 0, timeout=10000)
    fold = window.fold.main
    excluded_mags = set(np.round(fold.excluded.getData()[1], 6))
    aside_mags = set(np.round(fold.set_aside.getData()[1], 6))
    assert excluded_mags == set(np.round(window.desk.lc.mag[others], 6))
    assert round(outlier_mag, 6) in aside_mags and not aside_mags & excluded_mags
    # different symbols and colours
    assert fold.excluded.opts["symbol"] != fold.set_aside.opts["symbol"]
    assert fold.excluded.opts["pen"].color() != fold.set_aside.opts["pen"].color()
    # neither is among the points the model was fitted to
    drawn = np.concatenate([b.getData()[1] for b in fold.bins])
    assert outlier_mag not in drawn


def test_error_bars_on_the_folds(desk, qtbot):
    fold = desk.fold.main
    # both folds' model fits arrive from worker threads: wait for them (and for the
    # periodogram) so the bars are those of the fitted model, not of a preview
    assert desk.wait_idle()
    qtbot.waitUntil(lambda: fold.model is not None and desk.fold.alt.model is not None)
    assert not fold.error_bars.isVisible()
    desk.acts["errors"].trigger()
    assert desk.wait_idle()
    assert fold.error_bars.isVisible() and desk.fold.alt.error_bars.isVisible()
    heights = fold.error_bars.opts["height"]
    np.testing.assert_allclose(heights[: fold.model.err.size], 2 * fold.model.err)


def test_eclipsing_star_folds_with_primary_minimum_at_phase_zero(desk, qtbot):
    """CAL-V004 is an invented detached binary; its injected epoch of primary minimum
    (demo_data/truth.csv) falls at phase 0 of the fold."""
    import csv

    truth = {r["star_id"]: r for r in csv.DictReader(open(ROOT / "demo_data" / "truth.csv"))}
    desk.select_star("CAL-V004")
    qtbot.waitUntil(lambda: desk.fold.main.model is not None, timeout=10000)
    desk.wait_idle()
    fold = desk.fold.main
    assert fold.model.epoch_kind == "primary_minimum"
    assert "primary minimum" in fold.resid.getAxis("bottom").labelText
    period, epoch = float(truth["CAL-V004"]["period"]), float(truth["CAL-V004"]["epoch"])
    if abs(fold.period / period - 2.0) < 0.01:
        period = fold.period  # folded at the alias the analysis chose
    assert fold.period == pytest.approx(period, rel=1e-3)
    offset = ((fold.model.epoch - epoch) / period + 0.5) % 1.0 - 0.5
    assert abs(offset) < 0.02
