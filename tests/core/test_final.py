"""Final numbers for a class and a period (core.final), without a ledger."""

import json

import numpy as np
import pytest

from phasewise.core.analysis import AnalysisSettings, analyse
from phasewise.core.classes import EPOCH_MAXIMUM
from phasewise.core.final import (
    FinalNumbers,
    eclipse_shape,
    final_numbers,
    result_key,
    suggested_final,
)
from phasewise.core.physics import RELATIONS
from phasewise.core.results import StarResult
from phasewise.core.synthetic import make_survey


def test_eclipse_shape_recovers_an_injected_eclipse():
    # invented data: the injected truth (epoch, depths) is what is checked
    rng = np.random.default_rng(11)
    period, epoch, depth1, depth2, width = 1.7, 2460100.3, 0.8, 0.3, 0.03
    t = np.sort(rng.uniform(2460000.0, 2460400.0, 600))
    phase = ((t - epoch) / period + 0.5) % 1.0 - 0.5
    phase2 = ((t - epoch) / period) % 1.0 - 0.5
    mag = 15.0 + depth1 * np.exp(-0.5 * (phase / width) ** 2)
    mag += depth2 * np.exp(-0.5 * (phase2 / width) ** 2)
    err = np.full(t.size, 0.01)
    shape = eclipse_shape(t, mag + rng.normal(0, 0.01, t.size), err, period)
    cycles = (shape.epoch - epoch) / period
    assert abs(cycles - round(cycles)) < 0.005
    assert abs(shape.epoch - t.mean()) <= period / 2  # the minimum nearest the middle
    assert shape.depth_primary == pytest.approx(depth1, abs=0.05)
    assert shape.depth_secondary == pytest.approx(depth2, abs=0.05)
    assert 0 < shape.epoch_err < 0.01 * period


@pytest.fixture(scope="module")
def stars():
    survey = make_survey(40, seed=7)
    settings = AnalysisSettings()
    out = {}
    for lc, star in zip(survey.lightcurves, survey.stars, strict=True):
        code = star.truth.class_code
        if code in ("RRab", "DCEP") and code not in out:
            result = json.loads(json.dumps(analyse(lc, settings).to_dict()))
            if result["suggestions"][0]["class"] == code:
                out[code] = (lc, StarResult.from_dict(result), star.truth)
    assert set(out) == {"RRab", "DCEP"}
    return out, settings


def test_stored_suggestion_final_round_trips(stars):
    found, settings = stars
    lc, result, _ = found["RRab"]
    final = suggested_final(lc, result, settings)
    assert FinalNumbers.from_dict(json.loads(json.dumps(final.to_dict()))) == final
    assert result.final == final.to_dict()  # stored by the analysis under "final"
    assert final.result_key == result_key(result)


def test_physics_of_the_class_only(stars):
    found, settings = stars
    lc, result, _ = found["DCEP"]
    for code in ("DCEP", "T2CEP", "ACEP", "EA"):
        final = final_numbers(lc, result, code, result.number("period"), settings=settings)
        for item in final.physics:
            name = next(
                n for n, r in RELATIONS.items() if r.name == item["relation"].split(" +")[0]
            )
            applies = RELATIONS[name].applies_to
            assert code in applies or "*" in applies, (code, name)
        if code in ("ACEP", "EA"):
            assert final.physics == ()
    t2 = final_numbers(lc, result, "T2CEP", result.number("period"), settings=settings)
    assert [p["relation"] for p in t2.physics] == ["matsunaga06_pl_ks"]


def test_constant_and_rejected_carry_no_period(stars):
    found, settings = stars
    lc, result, _ = found["RRab"]
    for final in (
        final_numbers(lc, result, "NONVAR", 0.5, settings=settings),
        final_numbers(lc, result, "RRab", None, settings=settings, periodic=False),
    ):
        assert final.period is None and final.fourier is None and final.physics == ()
        assert final.epoch is None and final.period2 is None and final.period_ratio is None
        assert final.bands["V"].n_points > 0 and final.bands["V"].amplitude is None
    assert final_numbers(lc, result, "NONVAR", None, settings=settings).class_code == "CONST"


def test_a_persons_period_is_refined_with_its_error(stars):
    found, settings = stars
    lc, result, truth = found["RRab"]
    analysed = result.number("period")
    final = final_numbers(lc, result, "RRab", analysed * (1 + 3e-5), settings=settings)
    assert final.period_source == "person"
    assert final.period == pytest.approx(truth.period, rel=1e-4)
    assert 0 < final.period_err < 1e-4
    assert final.fourier["period"] == pytest.approx(final.period, rel=1e-12)
    assert final.epoch_kind == EPOCH_MAXIMUM
    assert final.epoch == pytest.approx(final.fourier["epoch_max"])


def test_set_aside_points_are_left_out_for_pulsators(stars):
    found, settings = stars
    lc, result, _ = found["RRab"]
    base = final_numbers(lc, result, "RRab", None, settings=settings)
    aside = set(result.set_aside_indices(lc.time))  # from outlier_times (older results)
    more = sorted(aside | {0, 1, 2})
    marked = StarResult.from_dict({**result.to_dict(), "set_aside": more})
    fewer = final_numbers(lc, marked, "RRab", None, settings=settings)
    new = sum(1 for i in (0, 1, 2) if lc.good[i] and i not in aside)
    assert new > 0
    total = sum(b.n_points for b in base.bands.values())
    assert total - sum(b.n_points for b in fewer.bands.values()) == new
    assert total == lc.n_good - len(aside)


@pytest.mark.parametrize("kind", ["sparse", "space"])
def test_primary_minimum_timed_by_the_whole_dip(kind):
    # recovery of the injected time of primary minimum (invented detached binaries of the
    # cadence battery), folded at the true period: ingress and egress points time the
    # minimum, and the stated error covers the offset
    from phasewise.core.final import eclipse_shape
    from phasewise.core.synthetic import battery_star_with_model

    offsets = []
    for seed in range(1500, 1506):
        lc, truth, _ = battery_star_with_model(kind, "EA", "", "", seed=seed)
        band = max(lc.bands, key=lambda b: lc.arrays(b)[0].size)
        t, m, e = lc.arrays(band)
        shape = eclipse_shape(t, m, e, truth.period)
        offset = abs(((shape.epoch - truth.epoch) / truth.period + 0.5) % 1.0 - 0.5)
        assert offset <= 3.0 * shape.epoch_err / truth.period + 1e-3, seed
        offsets.append(offset)
    assert np.median(offsets) < 0.002  # the parabola through the faintest bin gave 0.006 (sparse)
