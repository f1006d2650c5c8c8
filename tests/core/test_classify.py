"""Suggestions: scoring, reasons, half periods, aliases and missing features.

The feature sets below are invented, typical of each class (common practice,
no source); the check is that the class injected is the one suggested and
that the reasons say why.
"""

from __future__ import annotations

import math

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from phasewise.core.classify import (
    FEATURES,
    Rule,
    Suggestion,
    features_from_result,
    load_rulebook,
    parse_rulebook,
    shipped_rulebook_path,
    suggest,
)

# "significant": the analysis adopted the period (its status; one FAP threshold)
SIGNIFICANT = {"fap": 1e-30, "significant": 1.0, "snr": 40.0, "n_points": 600,
               "primary_band": "V"}  # fmt: skip

RRAB = {**SIGNIFICANT, "period": 0.58, "amplitude": 0.9, "R21": 0.47, "R31": 0.32,
        "rise_time": 0.17, "skewness": -0.7, "asymmetry": 0.6}  # fmt: skip
RRC = {**SIGNIFICANT, "period": 0.32, "amplitude": 0.45, "R21": 0.12, "R31": 0.06,
       "rise_time": 0.42, "skewness": -0.15}  # fmt: skip
EW_HALF = {**SIGNIFICANT, "period": 0.1875, "amplitude": 0.55, "R21": 0.05, "rise_time": 0.5,
           "skewness": 0.25, "second_harmonic_weight": 0.95, "depth_difference": 0.01,
           "depth_difference_err": 0.01}  # fmt: skip
EB_HALF = {**EW_HALF, "depth_difference": 0.3, "depth_difference_err": 0.02, "period": 0.6}
DCEP = {**SIGNIFICANT, "period": 8.3, "amplitude": 0.8, "R21": 0.4, "rise_time": 0.28,
        "skewness": -0.4}  # fmt: skip
DSCT = {**SIGNIFICANT, "period": 0.071, "amplitude": 0.55, "R21": 0.3, "rise_time": 0.33,
        "skewness": -0.4, "asymmetry": 0.4}  # fmt: skip
NOISE = {"fap": 0.6, "significant": 0.0, "slow_amplitude": 0.0, "snr": 2.1, "period": 0.377,
         "amplitude": 0.02, "primary_band": "V"}  # fmt: skip


def _top(features) -> Suggestion:
    return suggest(features)[0]


def _get(suggestions, code) -> Suggestion:
    return next(s for s in suggestions if s.class_code == code)


def test_membership_is_soft_and_linear():
    rule = Rule("period", 0.45, 1.0, margin=0.05, weight=1.0, source="x")
    assert rule.membership(0.7) == 1.0
    assert rule.membership(0.45) == 1.0
    assert rule.membership(0.425) == pytest.approx(0.5)
    assert rule.membership(1.025) == pytest.approx(0.5)
    assert rule.membership(0.39) == 0.0


def test_rrab_reasons_in_plain_words():
    top = _top(RRAB)
    assert top.class_code == "RRab"
    assert top.score == pytest.approx(1.0)
    assert "period 0.58 d lies in the RRab range 0.45–1 d" in top.reasons
    assert "R21 = 0.47 lies in the RRab range 0.3–0.7: asymmetric curve" in top.reasons
    assert top.period == pytest.approx(0.58)
    rrc = _get(suggest(RRAB), "RRc")
    assert any(text.startswith("period 0.58 d lies outside the RRc range") for text in rrc.against)


@pytest.mark.parametrize(
    ("features", "code"),
    [(RRAB, "RRab"), (RRC, "RRc"), (DCEP, "DCEP"), (DSCT, "DSCT"), (EW_HALF, "EW"),
     (EB_HALF, "EB"), (NOISE, "CONST")],
)  # fmt: skip
def test_typical_features_give_their_class(features, code):
    assert _top(features).class_code == code


def test_eclipsing_half_period_is_doubled_and_said():
    top = _top(EW_HALF)
    assert top.period == pytest.approx(2 * 0.1875)
    assert "likely half the true one" in top.note
    assert "2P = 0.375 d" in top.note
    # The pulsators keep the periodogram's period.
    assert _get(suggest(EW_HALF), "RRc").period == pytest.approx(0.1875)


def test_no_doubling_without_two_minima():
    features = {**EW_HALF, "second_harmonic_weight": 0.1}
    ew = _get(suggest(features), "EW")
    assert ew.period == pytest.approx(0.1875)
    assert "half" not in ew.note


def test_subtypes():
    assert _get(suggest({**DCEP, "period": 10.0}), "T2CEP").subtype == "W Vir"
    assert _get(suggest({**DCEP, "period": 2.0}), "T2CEP").subtype == "BL Her"
    assert _get(suggest({**DCEP, "period": 40.0}), "T2CEP").subtype == "RV Tau"
    assert _top(DSCT).subtype == "HADS"
    assert _top({**DSCT, "amplitude": 0.05}).subtype is None
    lpv = _top({**SIGNIFICANT, "period": 320.0, "amplitude": 4.2})
    assert (lpv.class_code, lpv.subtype) == ("LPV", "Mira-like")


def test_rrd_needs_its_period_ratio():
    features = {**RRC, "period": 0.40}
    rrd = _get(suggest(features), "RRd")
    assert rrd.score == 0.0
    assert any("period_ratio is needed" in text for text in rrd.against)
    double = _top({**features, "period_ratio": 0.745, "secondary_period": 0.536})
    assert double.class_code == "RRd"


def test_missing_features_lower_confidence_a_little():
    full = _get(suggest(RRAB), "RRab")
    partial = _get(suggest({**RRAB, "rise_time": None, "skewness": float("nan")}), "RRab")
    assert partial.score < full.score
    rules = load_rulebook(shipped_rulebook_path()).get("RRab").rules
    total = sum(r.weight for r in rules)
    lost = sum(r.weight for r in rules if r.feature in ("rise_time", "skewness"))
    assert partial.score == pytest.approx(1 - 0.15 * lost / total)  # missing_penalty 0.15
    assert set(partial.missing) == {"rise_time", "skewness"}
    assert _top({**RRAB, "rise_time": None}).class_code == "RRab"


def test_alias_mark_proposes_the_other_period():
    # A star whose true period is 0.58 d, picked at its 1 c/d alias.
    alias = 1 / (1 / 0.58 + 1)
    features = {**RRAB, "period": alias, "is_alias": 1, "alias_period": 0.58}
    rrab = _get(suggest(features), "RRab")
    assert rrab.period == pytest.approx(0.58)
    assert "marked as an alias" in rrab.note and "0.58 d fits RRab better" in rrab.note


def test_nightly_sampling_note():
    top = _top({**RRC, "period": 0.333})
    assert "close to 1/3 d" in top.note and "nightly sampling" in top.note


def test_unknown_when_nothing_fits():
    text = """
[class.RRab.period]
range = [0.45, 1.0]
margin = 0.05
weight = 1.0
source = "common practice, no source"

[class.UNKNOWN]
score = 0.4
"""
    book = parse_rulebook(text)
    ranked = suggest({"period": 3.0}, book)
    assert [s.class_code for s in ranked] == ["UNKNOWN", "RRab"]
    assert ranked[0].reasons == ("no class scores above 0.4 (best 0.00)",)


def test_to_dict_keys():
    data = _top(EW_HALF).to_dict()
    assert set(data) == {"class", "subtype", "score", "reasons", "against", "missing",
                         "period", "note"}  # fmt: skip
    assert data["class"] == "EW" and isinstance(data["reasons"], list)


def test_features_are_documented_with_units():
    for name in ("period", "log_period", "amplitude", "amplitude_V", "amplitude_I", "A1", "A2",
                 "A3", "R21", "R31", "phi21", "phi31", "rise_time", "skewness", "period_ratio",
                 "secondary_period", "depth_difference", "depth_difference_err",
                 "second_harmonic_weight", "colour_VI", "mean_mag_V", "mean_mag_I", "n_points",
                 "fap", "snr", "residual_std", "primary_band", "is_alias"):  # fmt: skip
        assert name in FEATURES and FEATURES[name].meaning
    assert "SINE" in FEATURES["phi31"].meaning


_number = st.one_of(st.none(), st.just(float("nan")), st.floats(-10, 1000))


@settings(max_examples=60, deadline=None)
@given(st.fixed_dictionaries({name: _number for name in (
    "period", "amplitude", "R21", "rise_time", "skewness", "fap", "snr", "period_ratio",
    "depth_difference", "second_harmonic_weight", "alias_period", "is_alias")}))  # fmt: skip
def test_scores_stay_in_unit_interval_and_ranked(features):
    ranked = suggest(features)
    scores = [s.score for s in ranked]
    assert all(0.0 <= s <= 1.0 and not math.isnan(s) for s in scores)
    assert scores == sorted(scores, reverse=True)


def test_features_from_result_follows_the_contract():
    result = {
        "status": "ok", "period": 0.1875, "period_err": 1e-6, "frequency": 1 / 0.1875,
        "fap": 1e-40, "n_good": 612, "primary_band": "V", "amplitude": 0.55,
        "amplitude_by_band": {"V": 0.55, "I": 0.41},
        "mean_mag_by_band": {"V": 17.2, "I": 16.4},
        "intensity_mean_mag_by_band": {"V": 17.15, "I": None},
        "fourier": {"form": "cosine", "amplitudes": [0.27, 0.02, 0.01],
                    "amplitudes_err": [0.002, 0.002, 0.002], "R21": 0.074, "R31": 0.037,
                    "phi21": 1.0, "phi31": 4.0, "phi31_err": 0.1},
        "rise_time": 0.5, "residual_std": 0.02, "period_ratio": None, "secondary_periods": [],
        "eclipse": {"depth_difference": 0.01, "depth_difference_err": 0.008,
                    "odd_harmonic_fraction": 0.03, "asymmetry": 0.02,
                    "depth_secondary_at_p": None},
        "candidates": [{"frequency": 1 / 0.1875, "period": 0.1875, "power": 0.8, "fap": 1e-40,
                        "snr": 35.0, "marks": ["alias"],
                        "mark_details": {"alias": {"parent_frequency": 1 / 0.23}}}],
        "features": {"skewness": 0.3},
    }  # fmt: skip
    features = features_from_result(result)
    assert features["log_period"] == pytest.approx(math.log10(0.1875))
    assert features["amplitude_I"] == 0.41 and features["n_points"] == 612
    # intensity mean preferred where given, magnitude mean otherwise
    assert features["mean_mag_V"] == 17.15 and features["mean_mag_I"] == 16.4
    assert features["colour_VI"] == pytest.approx(0.75)
    # cosine → sine: phi21 - pi/2, phi31 - pi (REFERENCES.md, exact)
    assert features["phi21"] == pytest.approx(1.0 - math.pi / 2 + 2 * math.pi)
    assert features["phi31"] == pytest.approx(4.0 - math.pi)
    assert features["A1"] == 0.27 and features["A3_err"] == 0.002
    assert features["second_harmonic_weight"] == pytest.approx(0.97)
    assert features["two_minima_at_p"] == 0.0
    assert features["is_alias"] == 1.0 and features["alias_period"] == pytest.approx(0.23)
    assert features["snr"] == 35.0 and features["skewness"] == 0.3
    assert set(FEATURES) <= set(features)
    top = suggest(features)[0]
    assert top.class_code == "EW" and top.period == pytest.approx(0.375)


def test_eclipsing_period_not_doubled_when_already_orbital():
    features = {**EB_HALF, "two_minima_at_p": 1.0}
    assert _get(suggest(features), "EB").period == pytest.approx(EB_HALF["period"])


def test_model_skewness_and_rise_time_from_fourier_terms():
    from scipy.stats import skew

    # A sharp-maximum curve: sine series m = sum A_i sin(2 pi i phi + phi_i).
    amplitudes, phases = [0.35, 0.17, 0.11], [0.3, 2.2, 4.4]
    result = {"fourier": {"form": "sine", "amplitudes": amplitudes, "phases": phases, "order": 3}}
    features = features_from_result(result)
    phase = [i / 5000 for i in range(5000)]
    curve = [
        sum(
            a * math.sin(2 * math.pi * (k + 1) * p + f)
            for k, (a, f) in enumerate(zip(amplitudes, phases, strict=True))
        )
        for p in phase
    ]
    # scipy.stats.skew (population form) as the reference on an independent sampling.
    assert features["skewness"] == pytest.approx(skew(curve), abs=2e-3)
    brightest, faintest = phase[curve.index(min(curve))], phase[curve.index(max(curve))]
    assert features["rise_time"] == pytest.approx((brightest - faintest) % 1.0, abs=1e-3)
    single = features_from_result(
        {"fourier": {"form": "sine", "amplitudes": [0.3], "phases": [1.0], "order": 1}}
    )
    assert single["skewness"] == pytest.approx(0.0, abs=1e-9)
    assert single["rise_time"] == pytest.approx(0.5, abs=1e-3)
    assert single["R21"] == 0.0  # order 1: no significant harmonic, taken as an upper limit


def test_unequal_minima_call_for_2p_even_with_a_weak_second_harmonic():
    # A fold at 2P whose alternate minima differ significantly does not repeat
    # at P; the eclipsing classes are then scored at 2P (and say so).
    features = {**EB_HALF, "second_harmonic_weight": 0.3, "unequal_minima": 1.0}
    eb = _get(suggest(features), "EB")
    assert eb.period == pytest.approx(2 * EB_HALF["period"])
    assert "significantly unequal" in eb.note
    plain = _get(suggest({**features, "unequal_minima": 0.0}), "EB")
    assert plain.period == pytest.approx(EB_HALF["period"])
    # ... but not when the fold at P already shows its own second dip
    orbital = _get(suggest({**features, "two_minima_at_p": 1.0}), "EB")
    assert orbital.period == pytest.approx(EB_HALF["period"])


def test_symmetric_curve_argues_against_pulsators():
    # eclipses are symmetric in time, pulsators rise faster than they decline
    symmetric = suggest({**RRC, "asymmetry": 0.01})
    asymmetric = suggest({**RRC, "asymmetry": 0.4})
    assert _get(symmetric, "RRc").score < _get(asymmetric, "RRc").score
    assert any("asymmetry" in a for a in _get(symmetric, "RRc").against)


def test_plateau_of_constant_light_tells_ea_from_eb():
    orbital = {**SIGNIFICANT, "period": 2.4, "amplitude": 0.5, "R21": 1.2, "skewness": 2.0,
               "asymmetry": 0.02, "two_minima_at_p": 1.0, "depth_secondary_at_p": 0.15,
               "depth_difference_fraction": 0.7}  # fmt: skip
    flat = suggest({**orbital, "plateau_fraction": 0.9})
    rolling = suggest({**orbital, "plateau_fraction": 0.2})
    assert _get(flat, "EA").score > _get(rolling, "EA").score
    assert _get(rolling, "EB").score > _get(flat, "EB").score
