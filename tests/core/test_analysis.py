"""The whole per-star pipeline: recovery of injected truth and the result contract."""

import json
from dataclasses import replace

import numpy as np
import pytest

from phasewise.core.analysis import STATUSES, AnalysisSettings, analyse
from phasewise.core.lightcurve import LightCurve
from phasewise.core.periodogram import compute_periodogram
from phasewise.core.synthetic import make_survey
from tests.contract import RESULT_KEYS

FOURIER_KEYS = {
    "order",
    "amplitudes",
    "phases",
    "R21",
    "R31",
    "phi21",
    "phi31",
    "R21_err",
    "R31_err",
    "phi21_err",
    "phi31_err",
}


@pytest.fixture(scope="module")
def survey():
    return make_survey(n_stars=60, seed=314)


def _first(survey, code):
    for lc, truth in zip(survey.lightcurves, survey.truth, strict=True):
        if truth.class_code == code and not truth.blazhko:
            return lc, truth
    raise LookupError(code)


def test_rrab_period_and_shape_recovered_within_errors(survey):
    lc, truth = _first(survey, "RRab")
    result = analyse(lc)
    assert result.status == "ok"
    # injected truth: period within 5 sigma of the refined period (recovery test)
    assert abs(result.period - truth.period) < 5 * result.period_err + 1e-6
    assert result.to_dict()["fourier"]["phi31"] == pytest.approx(truth.phi31, abs=0.4)
    assert result.suggestions[0].class_code == "RRab"


def test_result_dict_has_the_contract_keys_and_is_strict_json(survey):
    lc, _ = _first(survey, "RRc")
    d = analyse(lc).to_dict()
    assert RESULT_KEYS <= d.keys()
    assert FOURIER_KEYS <= d["fourier"].keys()
    for cand in d["candidates"]:
        assert {"period", "power", "fap", "marks"} <= cand.keys()
    for s in d["suggestions"]:
        assert {"class", "score", "reasons"} <= s.keys()
        assert 0.0 <= s["score"] <= 1.0
    for p in d["physics"]:
        assert {"relation", "value", "err", "flags"} <= p.keys()
    json.dumps(d, allow_nan=False)  # raises on NaN/inf or non-JSON types


def test_too_few_points_is_a_status_not_an_exception():
    lc = LightCurve("few", np.arange(6.0), np.ones(6) + np.arange(6) * 0.1, np.full(6, 0.01))
    result = analyse(lc)
    assert result.status == "too_few_points"
    assert "6 good points" in result.reason
    assert result.to_dict()["period"] is None


def test_constant_star_has_no_variability():
    t = np.linspace(0, 30, 50)
    result = analyse(LightCurve("flat", t, np.full(50, 15.0), np.full(50, 0.01)))
    assert result.status == "no_variability"


def test_noise_only_gets_no_significant_period():
    rng = np.random.default_rng(5)
    t = np.sort(rng.uniform(0, 200, 150))
    lc = LightCurve("noise", t, 15 + 0.01 * rng.standard_normal(150), np.full(150, 0.01))
    result = analyse(lc)
    assert result.status == "no_significant_period"
    assert result.fap > AnalysisSettings().fap_threshold


def test_nan_rows_are_excluded_not_fatal(survey):
    lc, truth = _first(survey, "RRab")
    mag = lc.mag.copy()
    mag[::7] = np.nan
    result = analyse(LightCurve(lc.star_id, lc.time, mag, lc.mag_err, lc.band, "HJD"))
    assert result.status == "ok"
    assert result.clean_report.non_finite == np.count_nonzero(np.isnan(mag))
    assert abs(result.period - truth.period) < 1e-3


def test_given_periodogram_gives_the_same_result(survey):
    lc, _ = _first(survey, "RRc")
    settings = AnalysisSettings()
    from phasewise.core.clean import clean

    cleaned, _ = clean(lc, settings.clean)
    pgram = compute_periodogram(cleaned, settings.periodogram)
    a = analyse(lc, settings).to_dict()
    b = analyse(lc, settings, periodogram=pgram).to_dict()
    assert a == b


def test_settings_hash_marks_staleness():
    base = AnalysisSettings()
    other = replace(base, periodogram=replace(base.periodogram, oversampling=8.0))
    assert base.hash == AnalysisSettings().hash
    assert base.hash != other.hash


def test_statuses_are_the_documented_ones(survey):
    for lc in survey.lightcurves[:10]:
        assert analyse(lc).status in STATUSES
