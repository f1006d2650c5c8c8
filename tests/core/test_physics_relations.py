"""The relation registry: one contract test walks every relation; worked values.

Worked numbers come from the project's REFERENCES list (computed from the
published formulas) or from the relation's source, as cited per relation.
"""

from __future__ import annotations

import math

import pytest

from phasewise.core.physics import RELATIONS, ccm89_ratio, extinction_ratio_i, sine_to_cosine_phi31

CONFIDENCE = {"paper", "secondary", "memory"}


@pytest.mark.parametrize("name", sorted(RELATIONS))
def test_every_relation_is_complete_and_evaluates_inside_its_range(name):
    relation = RELATIONS[name]
    assert relation.name == name
    assert relation.citation.strip()
    assert relation.confidence in CONFIDENCE
    assert isinstance(relation.band, str)
    assert relation.form in (None, "sine", "cosine")
    assert relation.scatter >= 0.0
    if relation.scatter == 0.0:
        # A zero scatter must be explained (conversion, or carried by coefficient errors).
        assert relation.coefficient_errors or "scatter" in relation.notes
    assert relation.applies_to
    assert set(relation.valid) <= set(relation.inputs)
    for low, high in relation.valid.values():
        assert low < high
    example = relation.example
    assert example.source.strip()
    assert set(example.inputs) == set(relation.inputs)
    assert relation.range_flags(example.inputs) == (), "the worked example lies inside the range"
    assert relation.evaluate(example.inputs) == pytest.approx(
        example.expected, abs=example.tolerance
    )
    value, err = relation.evaluate_with_error(example.inputs, {})
    assert err == pytest.approx(
        math.sqrt(relation.scatter**2 + _coefficient_variance(relation, example.inputs)), rel=1e-5
    )
    data = relation.to_dict()
    assert data["citation"] == relation.citation and data["scatter"] == relation.scatter


def _coefficient_variance(relation, inputs):
    total = 0.0
    for coefficient, sigma in relation.coefficient_errors.items():
        up = dict(relation.coefficients)
        up[coefficient] += 1e-4
        shifted = type(relation)(**{**relation.__dict__, "coefficients": up})
        slope = (shifted.evaluate(inputs) - relation.evaluate(inputs)) / 1e-4
        total += (slope * sigma) ** 2
    return total


def test_jk96_and_zinn_west_worked_numbers():
    # REFERENCES.md: JK96 with P = 0.55, phi31(sin) = 5.0 → -1.280, ZW -1.509
    # (Jurcsik & Kovács 1996; Jurcsik 1995 conversion).
    jk = RELATIONS["jk96_feh"].evaluate({"period": 0.55, "phi31": 5.0})
    assert jk == pytest.approx(-1.280, abs=5e-4)
    zw = RELATIONS["jurcsik95_zw"].evaluate({"feh_jk": jk})
    assert zw == pytest.approx(-1.509, abs=5e-4)
    assert RELATIONS["jk96_feh"].form == "sine" and RELATIONS["jk96_feh"].band == "V"


def test_morgan_rrc_worked_number_and_cosine_form():
    # REFERENCES.md: Morgan, Wahl & Wieckhorst 2007 with P = 0.32, phi31(cos) = 4.0 → -1.177.
    relation = RELATIONS["mww07_rrc_feh"]
    assert relation.form == "cosine"
    assert relation.evaluate({"period": 0.32, "phi31_cos": 4.0}) == pytest.approx(-1.177, abs=5e-4)


def test_sine_to_cosine_phi31():
    # cos x = sin(x + pi/2): phi31(cos) = phi31(sin) + pi (mod 2 pi) (REFERENCES.md, exact).
    assert sine_to_cosine_phi31(4.0 - math.pi) == pytest.approx(4.0)
    assert sine_to_cosine_phi31(5.0) == pytest.approx(5.0 + math.pi - 2 * math.pi)
    # Check the identity itself on a sampled three-harmonic curve.
    phases = (0.3, 1.1, 2.9)
    x = [i / 50 for i in range(50)]
    sine = [sum(math.sin((k + 1) * t + p) for k, p in enumerate(phases)) for t in x]
    cos_phases = [p - math.pi / 2 for p in phases]
    cosine = [sum(math.cos((k + 1) * t + p) for k, p in enumerate(cos_phases)) for t in x]
    assert sine == pytest.approx(cosine)
    phi31_sin = (phases[2] - 3 * phases[0]) % (2 * math.pi)
    phi31_cos = (cos_phases[2] - 3 * cos_phases[0]) % (2 * math.pi)
    assert sine_to_cosine_phi31(phi31_sin) == pytest.approx(phi31_cos)


def test_carretta_conversion():
    # Carretta et al. 2009 (REFERENCES.md, secondary): -0.413 + 0.130 Z - 0.356 Z^2.
    z = -1.509
    expected = -0.413 + 0.130 * z - 0.356 * z**2
    assert RELATIONS["carretta09_from_zw"].evaluate({"feh_zw": z}) == pytest.approx(expected)


def test_rr_lyrae_absolute_magnitudes():
    # Chaboyer 1999: M_V = 0.23([Fe/H] + 1.6) + 0.56, errors ±0.04, ±0.12.
    chaboyer = RELATIONS["chaboyer99_mv"]
    assert chaboyer.evaluate({"feh": -1.0}) == pytest.approx(0.23 * 0.6 + 0.56)
    _, err = chaboyer.evaluate_with_error({"feh": -1.0}, {"feh": 0.1})
    assert err == pytest.approx(
        math.sqrt((0.23 * 0.1) ** 2 + (0.04 * 0.6) ** 2 + 0.12**2), rel=1e-6
    )
    # Cacciari & Clementini 2003: M_V = 0.59 ± 0.03 at [Fe/H] = -1.5.
    value, err = RELATIONS["cc03_mv"].evaluate_with_error({"feh": -1.5}, {})
    assert value == pytest.approx(0.59) and err == pytest.approx(0.03, rel=1e-6)


def test_period_luminosity_relations():
    # Benedict et al. 2007: M_V = -4.05 - 2.43 (log P - 1), valid 3.7-35.6 d.
    pl = RELATIONS["benedict07_pl_v"]
    assert pl.evaluate({"period_fundamental": 3.7}) == pytest.approx(
        -4.05 - 2.43 * (math.log10(3.7) - 1)
    )
    assert pl.valid["period_fundamental"] == (3.7, 35.6)
    flags = pl.range_flags({"period_fundamental": 2.0})
    assert flags == ("outside calibration range: P0 = 2 d, valid 3.7–35.6 d",)
    # Matsunaga et al. 2006 (Ks): slope -2.41 about log P = 1.2.
    t2 = RELATIONS["matsunaga06_pl_ks"]
    assert t2.band == "Ks"
    assert t2.evaluate({"period": 10.0}) == pytest.approx(-2.41 * (1 - 1.2) - 4.00)
    # McNamara 2011, from memory: M_V = -2.89 log P - 1.31.
    assert RELATIONS["mcnamara11_pl_v"].confidence == "memory"
    assert RELATIONS["benedict07_pw_vi"].confidence == "memory"


def _ccm89_by_hand(wavelength_um, rv):
    # Cardelli, Clayton & Mathis 1989, eqs. 3a/3b, written out independently
    # with the coefficients in ascending order of y = x - 1.82.
    y = 1 / wavelength_um - 1.82
    a = [1, 0.17699, -0.50447, -0.02427, 0.72085, 0.01979, -0.77530, 0.32999]
    b = [0, 1.41338, 2.28305, 1.07233, -5.38434, -0.62251, 5.30260, -2.09002]
    poly = lambda c: sum(coef * y**i for i, coef in enumerate(c))  # noqa: E731
    return poly(a) + poly(b) / rv


def test_ccm89_extinction():
    # At V (x = 1.82 µm^-1) a = 1, b = 0 by construction of CCM89.
    assert ccm89_ratio(1 / 1.82) == pytest.approx(1.0)
    # I band at 0.80 µm from the formula.
    assert extinction_ratio_i(3.1) == pytest.approx(_ccm89_by_hand(0.80, 3.1), rel=1e-12)
    assert extinction_ratio_i(3.1) == pytest.approx(0.5975, abs=1e-4)
    # Infrared branch, eq. 2: a = 0.574 x^1.61, b = -0.527 x^1.61 (K at 2.2 µm).
    x = 1 / 2.2
    assert ccm89_ratio(2.2) == pytest.approx(0.574 * x**1.61 - 0.527 * x**1.61 / 3.1)
    # CCM89 Table 3 value for I (0.90 µm), from memory: A(I)/A(V) = 0.479.
    assert ccm89_ratio(0.90) == pytest.approx(0.479, abs=0.002)
    # A_V = R_V E(B-V) (CCM89): 3.1 * 0.1 = 0.31.
    assert RELATIONS["ccm89_av"].evaluate({"ebv": 0.1, "rv": 3.1}) == pytest.approx(0.31)
    with pytest.raises(ValueError, match="outside the CCM89 range"):
        ccm89_ratio(0.1)
