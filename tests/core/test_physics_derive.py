"""Per-star derivation, distance helpers and the population summary."""

from __future__ import annotations

import math

import pytest

from phasewise.core.errors import SettingsError
from phasewise.core.physics import (
    PhysicalValue,
    PhysicsSettings,
    StarPhysics,
    derive,
    distance_modulus,
    distance_to_modulus,
    modulus_to_distance,
    population_summary,
)


def _by(values, quantity, relation=None):
    return [
        v
        for v in values
        if v.quantity == quantity and (relation is None or v.relation.startswith(relation))
    ]


def test_lmc_distance_worked_value():
    # Pietrzyński et al. 2019, Nature 567, 200: mu = 18.477 ⇔ d = 49.59 kpc.
    d, _ = modulus_to_distance(18.477)
    assert d / 1000 == pytest.approx(49.59, abs=0.01)
    mu, _ = distance_to_modulus(49_590.0)
    assert mu == pytest.approx(18.477, abs=5e-4)
    # Their 0.09 kpc statistical error maps to about 0.004 mag, and back.
    mu, mu_err = distance_to_modulus(49_590.0, 90.0)
    assert mu_err == pytest.approx(5 / math.log(10) * 90 / 49_590)
    _, d_err = modulus_to_distance(mu, mu_err)
    assert d_err == pytest.approx(90.0, rel=1e-3)


def test_worked_arithmetic_from_references():
    # REFERENCES.md: V = 15, M_V = 0.6, E(B-V) = 0.1 (R_V = 3.1) → mu0 = 14.09, d = 6577 pc.
    mu, err = distance_modulus(15.0, 0.6, 3.1 * 0.1, 0.02, 0.1, 0.0)
    assert mu == pytest.approx(14.09)
    assert err == pytest.approx(math.hypot(0.02, 0.1))
    assert modulus_to_distance(mu)[0] == pytest.approx(6577, abs=1)
    with pytest.raises(ValueError, match="distance must be > 0"):
        distance_to_modulus(0.0)


RRAB = {"period": 0.55, "phi31": 5.0, "phi31_err": 0.05, "period_err": 1e-5,
        "mean_mag_V": 15.0, "A1": 0.3, "A3": 0.1, "primary_band": "V"}  # fmt: skip


def test_rrab_chain_with_errors():
    values = derive("RRab", RRAB, PhysicsSettings(ebv=0.1, ebv_err=0.01))
    jk = _by(values, "[Fe/H]_JK")[0]
    # JK96 worked number (REFERENCES.md): -1.280; error = phi31 term + scatter 0.14.
    assert jk.value == pytest.approx(-1.280, abs=5e-4)
    assert jk.err == pytest.approx(math.hypot(1.345 * 0.05, 5.394 * 1e-5, 0.14), rel=1e-4)
    zw = _by(values, "[Fe/H]_ZW")[0]
    assert zw.value == pytest.approx(-1.509, abs=5e-4)
    assert zw.err == pytest.approx(0.6988 * jk.err, rel=1e-6)
    mv = _by(values, "M_V", "chaboyer99")[0]
    assert mv.value == pytest.approx(0.23 * (zw.value + 1.6) + 0.56)
    av = _by(values, "A_V")[0]
    assert (av.value, av.err) == (pytest.approx(0.31), pytest.approx(0.031))
    mu = _by(values, "mu0", "chaboyer99")[0]
    assert mu.value == pytest.approx(15.0 - mv.value - 0.31)
    assert mu.err == pytest.approx(math.hypot(mv.err, 0.031))
    distance = _by(values, "distance", "chaboyer99")[0]
    assert distance.value == pytest.approx(10 ** (mu.value / 5 + 1))
    # Kovács & Walker 2001 M_V from the light curve, as a second estimate.
    assert _by(values, "M_V", "kw01")[0].value == pytest.approx(0.6518, abs=5e-4)
    for value in values:
        assert value.citation and value.relation
        assert set(value.to_dict()) >= {"relation", "value", "err", "flags"}


def test_carretta_scale_on_request():
    values = derive("RRab", RRAB, PhysicsSettings(metallicity_scale="C09"))
    zw = _by(values, "[Fe/H]_ZW")[0].value
    c09 = _by(values, "[Fe/H]_C09")[0].value
    assert c09 == pytest.approx(-0.413 + 0.130 * zw - 0.356 * zw**2)


def test_outside_calibration_range_is_flagged_not_hidden():
    values = derive("RRab", {**RRAB, "period": 0.9})
    jk = _by(values, "[Fe/H]_JK")[0]
    assert jk.value is not None
    assert "outside calibration range: P = 0.9 d, valid 0.3–0.85 d" in jk.flags
    # The flag follows the values built on it.
    mu = _by(values, "mu0", "chaboyer99")[0]
    assert any("input [Fe/H]_ZW flagged" in f or "input [Fe/H]_JK flagged" in f for f in mu.flags)


def test_rrc_uses_cosine_phi31():
    # Morgan et al. 2007 worked number (REFERENCES.md) with phi31(cos) = 4.0,
    # given to derive in our sine form: 4.0 - pi.
    values = derive("RRc", {"period": 0.32, "phi31": 4.0 - math.pi, "primary_band": "V"})
    zw = _by(values, "[Fe/H]_ZW")[0]
    assert zw.value == pytest.approx(-1.177, abs=5e-4)
    assert "phi31 converted from sine to cosine form (+pi)" in zw.flags
    mu = _by(values, "mu0")[0]
    assert mu.value is None and "missing input: mean V magnitude" in mu.flags


def test_wrong_band_is_not_silently_used():
    values = derive("RRab", {**RRAB, "primary_band": "I"})
    assert len(values) == 1 and values[0].value is None
    assert values[0].flags[0].startswith("band not observed: relation calibrated in V")


def test_cepheids_fundamentalised_and_wesenheit():
    features = {"period": 3.0, "mean_mag_V": 12.0, "mean_mag_I": 11.2, "primary_band": "V"}
    values = derive("DCEP(1O)", features, PhysicsSettings(ebv=0.2))
    mv = _by(values, "M_V")[0]
    p0 = 3.0 / 0.72  # Alcock et al. 1995 ratio
    assert mv.value == pytest.approx(-4.05 - 2.43 * (math.log10(p0) - 1))
    assert any(f.startswith("fundamentalised: P0 = P1/0.72") for f in mv.flags)
    mus = _by(values, "mu0")
    assert mus[0].relation.startswith("benedict07_pw_vi")  # reddening-free first
    w = 12.0 - 2.45 * (12.0 - 11.2)
    assert mus[0].value == pytest.approx(w - _by(values, "M_W")[0].value)
    assert "relation from memory, unverified" in mus[0].flags
    assert mus[1].value == pytest.approx(12.0 - mv.value - 3.1 * 0.2)
    # Below the calibration range of Benedict et al. 2007 (3.7-35.6 d):
    short = derive("DCEP", {**features, "period": 2.0})
    assert any("valid 3.7–35.6 d" in f for f in _by(short, "M_V")[0].flags)


def test_type2_cepheid_band_not_observed():
    values = derive("T2CEP", {"period": 10.0, "mean_mag_V": 14.0})
    assert [v.quantity for v in values] == ["M_Ks"]
    assert values[0].flags[0].startswith("band not observed: Ks relation")
    assert not _by(values, "mu0")


def test_delta_scuti_memory_flag_and_no_relation_classes():
    values = derive("DSCT", {"period": 0.1, "mean_mag_V": 16.0})
    mv = _by(values, "M_V")[0]
    assert mv.value == pytest.approx(1.58) and "relation from memory, unverified" in mv.flags
    for code in ("EW", "EA", "EB", "LPV", "CONST", "UNKNOWN", "ACEP", "RRd"):
        assert derive(code, {"period": 1.0}) == ()


def test_settings_validation():
    with pytest.raises(SettingsError, match="field 'metallicity_scale'"):
        PhysicsSettings(metallicity_scale="XX")
    with pytest.raises(SettingsError, match="field 'ebv'"):
        PhysicsSettings(ebv=-0.1)


def _star(star_id, code, period, mu, err):
    value = PhysicalValue("mu0", mu, err, "mag", "test", "test")
    return StarPhysics(star_id, code, period, (value,))


def test_population_summary():
    periods = [0.52, 0.55, 0.56, 0.54, 0.58, 0.53]
    mus = [14.00, 14.05, 13.95, 14.02, 13.98, 16.50]  # the last one is an outlier
    stars = [
        _star(f"s{i}", "RRab", p, m, 0.05)
        for i, (p, m) in enumerate(zip(periods, mus, strict=True))
    ]
    stars += [_star("c1", "RRc", 0.31, 14.01, 0.05), _star("c2", "RRc", 0.35, 13.99, 0.05)]
    stars += [_star("e1", "EW", 0.36, 0.0, 0.0)]
    summary = population_summary(stars)
    assert summary.mean_rrab_period == pytest.approx(sum(periods) / 6)
    assert summary.oosterhoff == "Oo I"
    assert summary.rrc_fraction == pytest.approx(2 / 8)
    rrab = next(d for d in summary.distances if d.class_code == "RRab")
    assert rrab.outliers == ("s5",)
    assert rrab.n_used == 5
    kept = mus[:5]
    assert rrab.mu0 == pytest.approx(sum(kept) / 5)
    assert rrab.mu0_err == pytest.approx(0.05 / math.sqrt(5))
    assert rrab.scatter == pytest.approx(math.sqrt(sum((m - sum(kept) / 5) ** 2 for m in kept) / 5))
    assert rrab.distance_pc == pytest.approx(10 ** (rrab.mu0 / 5 + 1))
    assert "EW" not in {d.class_code for d in summary.distances}  # zero error: unusable
    data = summary.to_dict()
    assert data["oosterhoff"] == "Oo I" and data["distances"][0]["outliers"] == ["s5"]


def test_oosterhoff_two_and_boundary_flag():
    stars = [
        _star(f"s{i}", "RRab", p, 14.0, 0.1) for i, p in enumerate([0.64, 0.66, 0.65, 0.67, 0.63])
    ]
    assert population_summary(stars).oosterhoff == "Oo II"
    near = population_summary([_star("a", "RRab", 0.61, 14.0, 0.1)])
    assert near.oosterhoff == "Oo II"
    assert any("within 0.02 d of the boundary" in f for f in near.oosterhoff_flags)


def test_population_accepts_dicts_from_results():
    values = derive("RRab", RRAB)
    record = {"star_id": "x", "class_code": "RRab", "period": 0.55,
              "physics": [v.to_dict() for v in values]}  # fmt: skip
    summary = population_summary([record])
    assert summary.distances[0].mu0 == pytest.approx(_by(values, "mu0")[0].value)


def test_summary_is_plain_json():
    import json

    import numpy as np

    stars = [
        _star(f"s{i}", "RRab", np.float64(0.55 + 0.01 * i), np.float64(14.0), 0.1) for i in range(4)
    ]
    data = population_summary(stars).to_dict()
    assert json.loads(json.dumps(data))["mean_rrab_period"] == pytest.approx(0.565)


def test_derive_reads_only_the_declared_features():
    # seeded stars analysed by core.analysis; every feature derive does not
    # declare is replaced by a value that would change any relation reading it
    from phasewise.core.analysis import AnalysisSettings, analyse
    from phasewise.core.classes import CLASSES
    from phasewise.core.classify import FEATURES
    from phasewise.core.physics.derive import FEATURES_READ
    from phasewise.core.results import StarResult
    from phasewise.core.synthetic import make_survey

    compared = 0
    for lc in make_survey(6, seed=11).lightcurves:
        result = StarResult.from_dict(analyse(lc, AnalysisSettings()).to_dict())
        features = {**result.feature_map, "primary_band": result.primary_band}
        junk = {name: 0.123 for name in FEATURES}
        junk.update({k: (v if k in FEATURES_READ else 0.123) for k, v in features.items()})
        for code in CLASSES:
            full = [v.to_dict() for v in derive(code, features)]
            declared = [v.to_dict() for v in derive(code, junk)]
            assert declared == full, code
            compared += len(full)
    assert compared > 20  # relations really ran
