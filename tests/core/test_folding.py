import numpy as np
import pytest
from astropy import units as u
from astropy.time import Time
from astropy.timeseries import TimeSeries

from phasewise.core.errors import PhasewiseError
from phasewise.core.folding import (
    period_step,
    phase_fold,
    phase_grid_times,
    power_at_fap,
    snap_to_peak,
    two_cycles,
)


def test_phase_fold_matches_astropy_timeseries_fold():
    # reference: astropy.timeseries.TimeSeries.fold with normalised phase wrapped to [0, 1)
    rng = np.random.default_rng(3)
    t = np.sort(2460000.0 + rng.uniform(0, 300, 500))
    period, epoch = 0.5731, 2460010.123
    ts = TimeSeries(time=Time(t, format="jd", scale="tdb"))
    folded = ts.fold(
        period=period * u.day,
        epoch_time=Time(epoch, format="jd", scale="tdb"),
        normalize_phase=True,
        wrap_phase=1,
    )
    ref = np.asarray(folded.time.value, dtype=float)
    # fold() sorts nothing; rows keep their order
    ours = phase_fold(t, period, epoch)
    np.testing.assert_allclose(ours, ref, atol=1e-6)
    assert ours.min() >= 0.0 and ours.max() < 1.0


def test_phase_fold_zero_at_epoch_and_rejects_bad_period():
    assert phase_fold(np.array([10.0, 10.5, 11.0]), 1.0, 10.0).tolist() == [0.0, 0.5, 0.0]
    with pytest.raises(PhasewiseError, match="field 'period': a period must be positive"):
        phase_fold(np.array([1.0]), 0.0)


def test_two_cycles_repeats_values():
    ph, m = two_cycles(np.array([0.1, 0.7]), np.array([12.0, 13.0]))
    assert ph.tolist() == pytest.approx([0.1, 0.7, 1.1, 1.7])
    assert m.tolist() == [12.0, 13.0, 12.0, 13.0]


def test_phase_grid_times_spans_the_cycles():
    ph, t = phase_grid_times(0.5, 100.0, n=5, cycles=2.0)
    assert ph.tolist() == [0.0, 0.5, 1.0, 1.5, 2.0]
    assert t.tolist() == [100.0, 100.25, 100.5, 100.75, 101.0]


def test_period_step_moves_last_point_by_the_stated_cycles():
    t = np.linspace(0.0, 250.0, 1000)
    p = 0.61
    dp = period_step(p, 250.0, cycles=0.01)
    # the number of elapsed cycles at the last point changes by 0.01 (first order)
    shift = t[-1] / p - t[-1] / (p + dp)
    assert shift == pytest.approx(0.01, rel=1e-3)
    assert period_step(2.0, 0.0, cycles=0.1) == pytest.approx(0.2)


def test_snap_to_peak_climbs_to_the_local_maximum():
    f = np.linspace(0.1, 10.0, 10001)
    power = np.exp(-0.5 * ((f - 1.745) / 0.01) ** 2) + 0.6 * np.exp(-0.5 * ((f - 3.49) / 0.01) ** 2)
    # a click on the flank of the first peak, far outside the search window
    i = snap_to_peak(f, power, 1.70, half_width=3)
    assert f[i] == pytest.approx(1.745, abs=1e-3)
    # a click near the second (lower) peak picks it, not the global maximum
    i = snap_to_peak(f, power, 3.52)
    assert f[i] == pytest.approx(3.49, abs=1e-3)
    with pytest.raises(PhasewiseError, match="non-empty"):
        snap_to_peak(np.array([]), np.array([]), 1.0)


def test_power_at_fap_inverts_the_single_frequency_fap():
    # Baluev 2008, eq. 6: fap_single(z) = (1 - z) ** ((N - 3) / 2); inverted in closed form
    n = 101

    def fap_single(z):
        return (1.0 - z) ** ((n - 3) / 2)

    for target in (0.1, 0.01, 0.001):
        expected = 1.0 - target ** (2.0 / (n - 3))
        assert power_at_fap(fap_single, target) == pytest.approx(expected, abs=1e-5)
    assert power_at_fap(lambda z: np.full_like(z, 0.5), 0.01) is None
    with pytest.raises(PhasewiseError, match="field 'fap'"):
        power_at_fap(fap_single, 1.5)


# ------------------------------------------------------------- fold_model
@pytest.fixture(scope="module")
def analysed_rrab():
    """An invented RRab of the demo survey with the analysis run on it."""
    from pathlib import Path

    from phasewise.core.analysis import AnalysisSettings, analyse
    from phasewise.core.io import open_photometry

    root = Path(__file__).resolve().parents[2]
    lc = open_photometry(root / "demo_data" / "stars").star("CAL-V001")
    settings = AnalysisSettings()
    return lc, settings, analyse(lc, settings)


def test_fold_model_at_the_analysed_period_is_the_analysis_fit(analysed_rrab):
    from phasewise.core.folding import fold_model

    lc, settings, result = analysed_rrab
    stored = result.to_dict()
    model = fold_model(lc, result.period, settings, result.primary_band, result=stored)
    fit = result.primary_fit
    assert model.order == fit.order
    np.testing.assert_allclose(
        model.model_grid, fit.model(model.epoch + model.phase_grid * model.period), atol=1e-9
    )
    assert model.epoch == pytest.approx(fit.epoch_max)
    assert model.rms == pytest.approx(fit.residual_std)
    # the points the analysis set aside are the ones marked here
    marked = set(model.index[model.set_aside])
    assert marked == set(stored["set_aside"]) & set(model.index) and marked


def test_fold_model_marks_user_exclusions_apart_and_is_cached(analysed_rrab):
    from phasewise.core.folding import FoldModelCache

    lc, settings, result = analysed_rrab
    band = result.primary_band
    idx = np.flatnonzero(lc.good & (np.asarray(lc.band) == band))[:4]
    excluded = lc.exclude(idx)
    cache = FoldModelCache(size=2)
    stored = result.to_dict()
    model = cache.get(excluded, result.period, settings, band, result=stored)
    assert set(model.index[model.excluded]) == set(idx)
    assert not (model.excluded & model.set_aside).any()
    assert cache.get(excluded, result.period, settings, band, result=stored) is model
    assert cache.get(lc, result.period, settings, band, result=stored) is not model


def test_fold_model_refuses_a_bad_period(analysed_rrab):
    from phasewise.core.folding import fold_model

    lc, settings, _ = analysed_rrab
    with pytest.raises(PhasewiseError, match="period must be positive"):
        fold_model(lc, -1.0, settings)


def test_fold_points_are_the_points_fold_model_draws_with_nothing_fitted(analysed_rrab):
    from phasewise.core.folding import fold_model, fold_points

    lc, settings, result = analysed_rrab
    stored = result.to_dict()
    band = result.primary_band
    model = fold_model(lc, result.period, settings, band, result=stored)
    points = fold_points(lc, result.period, band, result=stored)
    for name in ("index", "time", "mag", "err", "excluded"):
        np.testing.assert_array_equal(getattr(points, name), getattr(model, name))
    # the analysis's set-aside points are marked before any fit (the fit may add its own)
    marked = set(points.index[points.set_aside])
    assert marked == set(stored["set_aside"]) & set(points.index) and marked
    assert points.order is None and points.rms is None and points.model_grid.size == 0
    assert np.isnan(points.residual).all()
    # phase zero from the stored analysis: at its own period the fit puts it there too
    assert points.epoch == stored["epoch_max"]
    offset = ((model.epoch - points.epoch) / result.period + 0.5) % 1.0 - 0.5
    assert abs(offset) < 1e-6


def test_fold_points_eclipsing_marks_nothing_aside_and_refuses_a_bad_period(analysed_rrab):
    from phasewise.core.folding import fold_model, fold_points

    lc, settings, result = analysed_rrab
    stored = result.to_dict()
    band = result.primary_band
    points = fold_points(lc, result.period, band, eclipsing=True, result=stored)
    assert not points.set_aside.any()
    # phase zero at primary minimum from the start, where the fitted fold puts it
    model = fold_model(lc, result.period, settings, band, eclipsing=True, result=stored)
    assert points.epoch_kind == model.epoch_kind == "primary_minimum"
    offset = ((model.epoch - points.epoch) / result.period + 0.5) % 1.0 - 0.5
    assert abs(offset) < 0.01
    with pytest.raises(PhasewiseError, match="period must be positive"):
        fold_points(lc, 0.0, result.primary_band, result=stored)
