"""Cleaning rules: each one stated, counted and reversible where it can be."""

import numpy as np
import pytest

from phasewise.core.clean import CleanSettings, clean
from phasewise.core.errors import SettingsError
from phasewise.core.lightcurve import LightCurve


def _curve(n=30, seed=3, **kwargs):
    rng = np.random.default_rng(seed)
    time = 2460000 + np.sort(rng.uniform(0, 50, n))
    mag = 15 + 0.01 * rng.normal(size=n)
    err = np.full(n, 0.02)
    return time, mag, err


def test_non_finite_points_are_excluded_not_deleted():
    time, mag, err = _curve()
    mag[3], time[5], err[7] = np.nan, np.inf, np.nan
    cleaned, report = clean(LightCurve("S", time, mag, err))
    assert cleaned.n_points == 30  # nothing deleted
    assert cleaned.excluded[[3, 5, 7]].all() and cleaned.excluded.sum() == 3
    assert report.non_finite == 3 and report.n_good_out == 27


def test_zero_and_negative_errors_get_the_median_positive_error():
    time, mag, err = _curve()
    err[:10] = np.linspace(0.01, 0.05, 10)
    err[20], err[21] = 0.0, -0.3
    positive = np.delete(err, [20, 21])
    cleaned, report = clean(LightCurve("S", time, mag, err))
    assert report.error_floor == pytest.approx(np.median(positive))
    assert report.errors_floored == 2
    assert cleaned.mag_err[20] == cleaned.mag_err[21] == pytest.approx(np.median(positive))
    assert cleaned.n_good == 30


def test_a_set_error_floor_is_used():
    time, mag, err = _curve()
    err[0] = 0.0
    cleaned, report = clean(LightCurve("S", time, mag, err), CleanSettings(error_floor=0.05))
    assert cleaned.mag_err[0] == 0.05 and report.error_floor == 0.05


def test_no_positive_error_anywhere_excludes_those_points():
    time, mag, _ = _curve(n=12)
    cleaned, report = clean(LightCurve("S", time, mag, np.zeros(12)))
    assert report.errors_unfixable == 12 and report.error_floor is None
    assert cleaned.n_good == 0 and report.too_few_points


def test_duplicates_are_merged_into_the_weighted_mean():
    time, mag, err = _curve()
    time[11] = time[10]
    mag[10], mag[11] = 15.0, 15.3
    err[10], err[11] = 0.01, 0.02
    band = np.array(["V"] * 30, dtype=object)
    cleaned, report = clean(LightCurve("S", time, mag, err, band=band))
    w = np.array([1 / 0.01**2, 1 / 0.02**2])
    # inverse-variance weighted mean (common practice, no source)
    assert cleaned.n_points == 29 and report.duplicates_merged == 1 and report.duplicate_groups == 1
    assert cleaned.mag[10] == pytest.approx((w @ [15.0, 15.3]) / w.sum())
    assert cleaned.mag_err[10] == pytest.approx(1 / np.sqrt(w.sum()))


def test_same_time_in_two_bands_is_not_a_duplicate():
    time, mag, err = _curve()
    time[11] = time[10]
    band = np.array(["V"] * 30, dtype=object)
    band[11] = "I"
    _, report = clean(LightCurve("S", time, mag, err, band=band))
    assert report.duplicate_groups == 0


def test_duplicates_can_be_flagged_instead():
    time, mag, err = _curve()
    time[11] = time[12] = time[10]
    err[12] = 0.005
    cleaned, report = clean(LightCurve("S", time, mag, err), CleanSettings(duplicates="flag"))
    assert cleaned.n_points == 30 and report.duplicates_flagged == 2
    assert cleaned.excluded[10] and cleaned.excluded[11] and not cleaned.excluded[12]


def test_duplicate_tolerance_in_days():
    time, mag, err = _curve()
    time[11] = time[10] + 1e-6
    assert clean(LightCurve("S", time, mag, err))[1].duplicate_groups == 0
    settings = CleanSettings(duplicate_tolerance=1e-5)
    assert clean(LightCurve("S", time, mag, err), settings)[1].duplicate_groups == 1


def test_sigma_clipping_is_off_by_default_and_removes_a_planted_outlier():
    time, mag, err = _curve(n=200)
    mag[50] += 1.0
    _, report = clean(LightCurve("S", time, mag, err))
    assert report.sigma_clipped == 0
    cleaned, report = clean(
        LightCurve("S", time, mag, err), CleanSettings(sigma_clip=5.0, clip_window=5.0)
    )
    assert report.sigma_clipped == 1 and cleaned.excluded[50]


def test_running_median_follows_slow_variation():
    # a 1-mag, 200-day variation is followed by a 5-day running median, so only the
    # planted outlier goes; a plain clip about the mean would not find it at all
    rng = np.random.default_rng(2)
    time = np.sort(rng.uniform(0, 400, 400))
    mag = 15 + 1.0 * np.sin(2 * np.pi * time / 200) + 0.01 * rng.normal(size=400)
    mag[123] += 0.3
    settings = CleanSettings(sigma_clip=6.0, clip_window=5.0)
    cleaned, report = clean(LightCurve("S", time, mag, np.full(400, 0.01)), settings)
    assert report.sigma_clipped == 1 and cleaned.excluded[123]
    assert abs(mag[123] - mag.mean()) < 2 * mag.std()  # invisible against the whole curve


def test_few_points_are_marked_not_dropped():
    time, mag, err = _curve(n=8)
    cleaned, report = clean(LightCurve("S", time, mag, err))
    assert report.too_few_points and cleaned.n_points == 8


def test_report_to_dict_has_stable_keys():
    time, mag, err = _curve()
    mag[0] = np.nan
    cleaned, report = clean(LightCurve("S", time, mag, err))
    data = report.to_dict()
    assert data["non_finite"] == 1 and data["settings"]["duplicates"] == "merge"
    assert set(data) >= {
        "star_id",
        "n_points_in",
        "errors_floored",
        "duplicates_merged",
        "sigma_clipped",
        "too_few_points",
    }
    assert any("non-finite" in note for note in cleaned.meta.notes)


def test_settings_are_validated():
    with pytest.raises(SettingsError, match=r"field 'duplicates'"):
        CleanSettings(duplicates="drop")
    with pytest.raises(SettingsError, match=r"field 'error_floor'"):
        CleanSettings(error_floor=-1)
