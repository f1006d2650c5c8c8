"""Population diagrams: coordinates, guide lines and the outlier rule."""

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from phasewise.core import diagrams as dg
from phasewise.core.errors import SettingsError


def _field(seed=3):
    """Invented field: 30 RRab, 15 RRc, 4 RRd; one RRab injected far off its locus."""
    rng = np.random.default_rng(seed)
    points = []
    for i in range(30):
        period = rng.uniform(0.5, 0.65)
        points.append(
            dg.StarPoint(
                f"AB{i:02d}",
                "RRab",
                "suggestion",
                period=period,
                amplitude_by_band={"V": 1.6 - 1.5 * period + rng.normal(0, 0.05), "I": 0.6},
                mean_mag_by_band={"V": 16.1 + rng.normal(0, 0.05), "I": 15.5},
                R21=0.48 + rng.normal(0, 0.02),
                phi31=5.0 + rng.normal(0, 0.1),
            )
        )
    for i in range(15):
        points.append(
            dg.StarPoint(
                f"C{i:02d}",
                "RRc",
                "verdict",
                status="confirmed",
                period=rng.uniform(0.3, 0.38),
                amplitude_by_band={"V": 0.45 + rng.normal(0, 0.03)},
                mean_mag_by_band={"V": 16.05, "I": 15.7},
                R21=0.15 + rng.normal(0, 0.02),
                phi31=3.2 + rng.normal(0, 0.1),
            )
        )
    for i in range(4):
        p0 = rng.uniform(0.48, 0.52)
        points.append(
            dg.StarPoint(
                f"D{i}", "RRd", period=0.745 * p0, shorter_period=0.745 * p0, longer_period=p0
            )
        )
    # the injected outlier: an "RRab" with an RRc-like amplitude and R21
    outlier = dg.StarPoint(
        "ODD",
        "RRab",
        period=0.58,
        amplitude_by_band={"V": 0.3},
        mean_mag_by_band={"V": 16.1, "I": 15.5},
        R21=0.1,
        phi31=5.0,
    )
    return points + [outlier]


def test_diagrams_hold_one_point_per_star_with_coordinates():
    points = _field()
    pa = dg.period_amplitude(points, "V")
    assert pa.counts() == {"RRab": 31, "RRc": 15}  # RRd stars have no amplitude
    odd = pa.star_ids.index("ODD")
    assert pa.x[odd] == pytest.approx(math.log10(0.58))
    assert pa.y[odd] == pytest.approx(0.3)
    assert dg.period_amplitude(points, "I").counts() == {"RRab": 30}
    ratio = dg.period_ratio(points)
    assert ratio.counts() == {"RRd": 4}
    assert np.allclose(ratio.y, 0.745)
    cmd = dg.colour_magnitude(points)
    assert len(cmd) == 46 and cmd.invert_y
    assert cmd.x[cmd.star_ids.index("C00")] == pytest.approx(0.35)
    pl = dg.period_luminosity(points, "V")
    assert pl.invert_y and "[mag]" in pl.y_label and "[d]" in pl.x_label


def test_inside_returns_stars_in_rectangle_in_any_corner_order():
    pa = dg.period_amplitude(_field(), "V")
    # RRc sit at log P < -0.4 and amplitude < 0.6; RRab at log P > -0.31
    chosen = pa.inside((-0.35, -0.6), (1.0, 0.0))
    assert sorted(chosen) == sorted(f"C{i:02d}" for i in range(15))


def test_outlier_rule_flags_the_injected_star_only():
    points = _field()
    planes = [dg.period_amplitude(points, "V"), dg.r21_logp(points), dg.phi31_logp(points)]
    flags = dg.find_outliers(planes)
    assert {f.star_id for f in flags} == {"ODD"}
    assert {f.diagram for f in flags} == {"period_amplitude", "r21_logp"}
    assert all(f.distance > 4.0 for f in flags)
    assert "RRab locus" in flags[0].reason()


def test_outlier_rule_skips_small_classes_and_unknown():
    points = _field()
    # 4 RRd stars with one far off: too few members to have a locus
    points.append(dg.StarPoint("D9", "RRd", period=0.39, shorter_period=0.39, longer_period=0.6))
    flags = dg.find_outliers([dg.period_ratio(points)], dg.OutlierRule(min_members=8))
    assert flags == ()
    flags = dg.find_outliers([dg.period_ratio(points)], dg.OutlierRule(min_members=5))
    assert [f.star_id for f in flags] == ["D9"]
    unknown = [dg.StarPoint(f"U{i}", "UNKNOWN", period=0.5, R21=0.3) for i in range(10)]
    unknown.append(dg.StarPoint("U99", "UNKNOWN", period=5.0, R21=0.9))
    assert dg.find_outliers([dg.r21_logp(unknown)]) == ()


def test_ratio_diagram_keeps_double_mode_candidates_only():
    points = [
        dg.StarPoint("RD", "RRd", period=0.37, shorter_period=0.37, longer_period=0.5),
        dg.StarPoint("AB", "RRab", period=0.55, shorter_period=0.41, longer_period=0.55),
        dg.StarPoint("TR", "RRab", period=0.55, shorter_period=0.05, longer_period=0.55),
        dg.StarPoint("EW", "EW", period=0.3, shorter_period=0.222, longer_period=0.3),
        dg.StarPoint("NV", "CONST", period=1.0, shorter_period=0.75, longer_period=1.0),
    ]
    diagram = dg.period_ratio(points)
    # ratio 0.1 is outside the window; eclipsing and constant stars have no second mode
    assert sorted(diagram.star_ids) == ["AB", "RD"]
    assert diagram.locus_classes == frozenset({"RRd"})


def test_correlated_distance_spares_stars_along_a_sequence():
    rng = np.random.default_rng(4)
    log_p = rng.uniform(-0.35, -0.1, 60)
    phi31 = 6.0 + 4.0 * log_p + rng.normal(0, 0.03, 60)  # a steep, tight sequence
    along = np.append(log_p, 0.05), np.append(phi31, 6.0 + 4.0 * 0.05)  # its extension
    across = np.append(log_p, -0.225), np.append(phi31, 6.0 + 4.0 * -0.225 + 0.3)  # 10 sigma
    floor = (0.0, 0.0)
    assert (
        dg.robust_distance(*along, floor)[-1]
        < 4
        < dg.robust_distance(*along, floor, correlated=False)[-1]
    )
    # and catches a star off the sequence that per-axis spreads miss
    assert (
        dg.robust_distance(*across, floor)[-1]
        > 4
        > dg.robust_distance(*across, floor, correlated=False)[-1]
    )


def test_robust_distance_matches_hand_computation():
    x = np.array([0.0, 1.0, 2.0, 3.0, 100.0])
    y = np.zeros(5)
    d = dg.robust_distance(x, y, scale_floor=(0.0, 1.0), correlated=False)
    # median 2, MAD = median(|x-2|) = median(2,1,0,1,98) = 1 -> s = 1.4826
    assert d[4] == pytest.approx(98 / 1.4826)
    assert d[2] == 0.0


def test_outlier_rule_is_validated_and_described():
    with pytest.raises(SettingsError, match="outlier threshold"):
        dg.OutlierRule(threshold=0)
    with pytest.raises(SettingsError, match="outlier min_members"):
        dg.OutlierRule(min_members=2)
    text = dg.OutlierRule(threshold=3.5, min_members=6).describe()
    assert "3.5" in text and "≥ 6" in text and "MAD" in text


def test_class_used_prefers_the_verdict_then_the_suggestion():
    suggestions = [{"class": "RRc", "score": 0.8}, {"class": "EW", "score": 0.2}]
    assert dg.class_used("unreviewed", None, suggestions) == ("RRc", "suggestion")
    assert dg.class_used("relabelled", "RRd", suggestions) == ("RRd", "verdict")
    assert dg.class_used("confirmed", "RRc", suggestions) == ("RRc", "verdict")
    # a confirmation stored without a class confirms the top suggestion
    assert dg.class_used("confirmed", None, suggestions) == ("RRc", "verdict")
    assert dg.class_used("deferred", "RRd", suggestions) == ("RRc", "suggestion")
    assert dg.class_used("rejected", None, suggestions) == ("REJECTED", "verdict")
    assert dg.class_used("unreviewed", None, []) == ("UNKNOWN", "none")


def test_point_from_result_dict():
    result = {
        "period": 0.5,
        "primary_band": "V",
        "amplitude_by_band": {"V": 0.9, "I": float("nan")},
        "mean_mag_by_band": {"V": 16.0, "I": 15.4},
        "fourier": {"form": "cosine", "R21": 0.45, "phi31": 1.0},
        "secondary_periods": [
            {"period": 0.25, "kind": "harmonic"},
            {"period": 0.2},
            {"period": 0.3725, "kind": "independent"},
        ],
        "period_ratio": 0.745,
        "suggestions": [{"class": "RRd", "score": 0.7}],
    }
    point = dg.StarPoint.from_result("S1", result)
    assert point.class_code == "RRd" and point.class_source == "suggestion"
    assert point.amplitude_by_band == {"V": 0.9}  # NaN dropped
    # phi31(sin) = phi31(cos) - pi (mod 2 pi), REFERENCES.md (derivation)
    assert point.phi31 == pytest.approx(1.0 - math.pi + 2 * math.pi)
    assert (point.shorter_period, point.longer_period) == (0.3725, 0.5)
    assert point.colour() == pytest.approx(0.6)
    harmonic_only = dict(result, secondary_periods=[{"period": 0.25, "kind": "harmonic"}])
    assert dg.StarPoint.from_result("S3", harmonic_only).ratio is None
    empty = dg.StarPoint.from_result("S2", None, status="rejected")
    assert empty.class_code == "REJECTED" and empty.period is None


def test_relation_line_at_a_distance_modulus():
    # Benedict et al. 2007 classical Cepheid PL in V: M_V = -4.05 - 2.43 (log P - 1)
    # (REFERENCES.md, secondary); at log P = 1, M_V = -4.05.  mu = 18.477 is the
    # LMC value of Pietrzynski et al. 2019.  A_V = 3.1 * 0.1 (Cardelli et al. 1989).
    line = dg.relation_line(lambda lp: -4.05 - 2.43 * (lp - 1), (0.5, 1.5), 18.477, 0.31, n=3)
    assert line.x.tolist() == [0.5, 1.0, 1.5]
    assert line.y[1] == pytest.approx(-4.05 + 18.477 + 0.31)
    assert line.y[0] - line.y[2] == pytest.approx(2.43)


def test_fit_distance_modulus_worked_arithmetic():
    # REFERENCES.md worked arithmetic: V = 15, M_V = 0.6, E(B-V) = 0.1 -> mu0 = 14.09
    mu, err = dg.fit_distance_modulus([15.0], [0.6], 0.12, extinction=3.1 * 0.1)
    assert mu == pytest.approx(14.09)
    assert err == pytest.approx(0.12)
    mu, err = dg.fit_distance_modulus([15.0, 15.2], [0.6, 0.6], [0.1, 0.2])
    assert mu == pytest.approx((14.4 / 0.01 + 14.6 / 0.04) / (1 / 0.01 + 1 / 0.04))
    assert err == pytest.approx(1 / math.sqrt(125))


def test_instability_strip_moves_with_distance_and_reddening():
    blue, red = dg.instability_strip(14.0)
    assert "from memory" in blue.label and blue.citation == "from memory"
    assert np.all(red.x > blue.x)  # red edge is redder at every magnitude
    shifted_blue, _ = dg.instability_strip(14.0, a_v=0.31, e_v_i=0.13)
    assert np.allclose(shifted_blue.y - blue.y, 0.31)
    assert np.allclose(shifted_blue.x - blue.x, 0.13)
    assert "FROM MEMORY" in dg.INSTABILITY_STRIP_NOTE


def test_period_ratio_guides_are_cited():
    diagram = dg.period_ratio(_field())
    assert diagram.lines and all(line.citation for line in diagram.lines)
    assert any(np.allclose(line.y, 0.742) for line in diagram.lines)


def test_phi31_is_shown_in_a_window_that_keeps_groups_whole():
    # RRc-like phases straddle 0 = 2 pi; RRab-like near 5: the cut goes in the gap between
    phases = [6.1, 6.2, 0.1, 0.3, 4.9, 5.0, 5.1]
    start = dg.phase_window_start(phases)
    assert 0.3 < start < 4.9
    points = [dg.StarPoint(f"S{i}", "RRc", period=0.3, phi31=v) for i, v in enumerate(phases)]
    diagram = dg.phi31_logp(points)
    shown = dict(zip(diagram.star_ids, diagram.y, strict=True))
    assert shown["S2"] == pytest.approx(0.1 + 2 * math.pi)  # next to 6.1 and 6.2
    assert shown["S4"] == pytest.approx(4.9)
    assert np.ptp(diagram.y) < 2 * math.pi
    assert dg.phase_window_start([1.0]) == 0.0


def test_outlier_rule_survives_coinciding_members():
    # thirty copies of one star (a duplicated import): no spread, no correlation
    twins = [dg.StarPoint(f"T{i}", "RRab", period=0.55, R21=0.45) for i in range(30)]
    twins.append(dg.StarPoint("FAR", "RRab", period=0.55, R21=0.9))
    flags = dg.find_outliers([dg.r21_logp(twins)])
    assert [f.star_id for f in flags] == ["FAR"]  # judged against the floor spread


@given(
    st.lists(
        st.tuples(
            st.floats(-3, 3, allow_nan=False, allow_subnormal=False),
            st.floats(-50, 50, allow_nan=False, allow_subnormal=False),
        ),
        min_size=1,
        max_size=60,
    )
)
@settings(max_examples=60, deadline=None)
def test_robust_distance_is_finite_and_non_negative(pairs):
    x, y = np.array(pairs).T
    d = dg.robust_distance(x, y, (1e-3, 1e-3))
    assert d.shape == x.shape
    assert np.all(np.isfinite(d)) and np.all(d >= 0)
