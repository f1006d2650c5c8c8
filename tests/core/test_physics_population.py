"""The field summary's outlier rejection against the quadratic rule it replaced.

``reference_class_distance`` is the former ``core.physics.population.class_distance``
verbatim (the weighted mean of the others recomputed from scratch for every star
in every round).  The linear version must give the same outliers, in the same
order, and the same numbers, on any input: ties, NaN and infinite values,
negative or extreme errors, one to three stars.
"""

from __future__ import annotations

import math
import random

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from phasewise.core.physics import PhysicalValue, StarPhysics, class_distance, population_summary
from phasewise.core.physics import population as population_module
from phasewise.core.physics.distance import modulus_to_distance
from phasewise.core.physics.population import ClassDistance, _candidates, _weight

# --- the former implementation, kept as the reference -----------------------


def _reference_weighted(mus, errs):
    weights = [1.0 / e**2 for e in errs]
    total = sum(weights)
    mean = sum(w * m for w, m in zip(weights, mus, strict=True)) / total
    if len(mus) > 1:
        scatter = math.sqrt(
            sum(w * (m - mean) ** 2 for w, m in zip(weights, mus, strict=True)) / total
        )
    else:
        scatter = 0.0
    return mean, 1.0 / math.sqrt(total), scatter


def reference_class_distance(code, members):
    if not members:
        return None
    kept = list(members)
    outliers = []
    changed = True
    while changed and len(kept) > 3:
        changed = False
        worst, worst_z = None, 3.0
        for star in kept:
            others = [s for s in kept if s is not star]
            mean, _, scatter = _reference_weighted([s[1] for s in others], [s[2] for s in others])
            sigma = max(scatter, star[2])
            z = abs(star[1] - mean) / sigma if sigma > 0 else 0.0
            if z > worst_z:
                worst, worst_z = star, z
        if worst is not None:
            kept.remove(worst)
            outliers.append(worst[0])
            changed = True
    mean, err, scatter = _reference_weighted([s[1] for s in kept], [s[2] for s in kept])
    distance, distance_err = modulus_to_distance(mean, err)
    return ClassDistance(
        code, len(members), len(kept), mean, err, scatter, distance, distance_err, tuple(outliers)
    )


# --- comparison --------------------------------------------------------------


def _same_number(a, b):
    if isinstance(a, float) and math.isnan(a):
        return isinstance(b, float) and math.isnan(b)
    return a == b or math.isclose(a, b, rel_tol=1e-12, abs_tol=1e-12)


def assert_same_as_reference(members):
    try:
        expected = reference_class_distance("RRab", members)
    except Exception as error:  # the rule's own errors (zero or huge err) must stay
        with pytest.raises(type(error)):
            class_distance("RRab", members)
        return
    got = class_distance("RRab", members)
    if expected is None:
        assert got is None
        return
    want, have = expected.to_dict(), got.to_dict()
    assert have["outliers"] == want["outliers"]
    assert have["n_used"] == want["n_used"] and have["n_stars"] == want["n_stars"]
    for key in ("mu0", "mu0_err", "scatter", "distance_pc", "distance_err_pc"):
        assert _same_number(have[key], want[key]), (key, have[key], want[key])


def _members(mus, errs):
    return [
        (f"s{i:03d}", float(m), float(e)) for i, (m, e) in enumerate(zip(mus, errs, strict=True))
    ]


# --- fixed cases --------------------------------------------------------------


@pytest.mark.parametrize(
    "mus, errs",
    [
        ([], []),
        ([14.0], [0.1]),
        ([14.0, 19.0], [0.1, 0.2]),
        ([14.0, 14.1, 25.0], [0.1, 0.1, 0.1]),
        ([14.0, 14.1, 13.9, 25.0], [0.1, 0.1, 0.1, 0.1]),
        ([14.0] * 8, [0.1] * 8),  # all tied: no scatter, nothing rejected
        ([14.0] * 6 + [15.0, 15.0], [0.05] * 8),  # tied outliers: the rule picks one
        ([14.0, 14.0, 14.0, 14.0, 13.0, 15.0], [0.1] * 6),  # symmetric: a tie by construction
        ([14.0, 14.02, 13.98, 14.01, 16.5], [0.05, 0.05, 0.05, 0.05, 0.001]),  # dominant weight
        ([14.0, 14.02, 13.98, 14.01, 14.2], [0.05, 0.05, 0.05, 0.05, -0.05]),  # negative err
        ([14.0, 14.02, 13.98, math.nan, 14.01], [0.05] * 5),
        ([14.0, 14.02, 13.98, 14.01, 18.0], [0.05, 0.05, 0.05, 0.05, math.nan]),
        ([14.0, math.nan, 13.98, math.nan, 14.01], [0.05] * 5),
        ([14.0, 14.02, 13.98, math.inf, 14.01], [0.05] * 5),
        ([14.0, 14.02, 13.98, 14.01, 14.5], [0.05, 0.05, 0.05, 0.05, math.inf]),
        ([14.0, 14.02, 13.98, 14.01, 14.5], [0.05, 0.05, 0.05, 0.05, 1e-200]),  # 1/0
        ([14.0, 14.02, 13.98, 14.01, 14.5], [0.05, 0.05, 0.05, 1e200, 0.05]),  # overflow
        ([14.0, 14.02, 13.98, 14.01, 14.5], [0.05, 0.05, 1e-160, 0.05, 0.05]),  # infinite w
        ([1e60, 14.02, 13.98, 14.01, 14.5], [0.05] * 5),
        # found by hypothesis: negative err, no scatter among the others, so its z is 0
        ([14.0, 14.0, 14.0, 14.5], [0.05, 0.05, 0.05, -0.0078125]),
        # found by hypothesis: the rule overflows on (m - mean)**2 before it
        # meets the zero weight, so OverflowError, not ZeroDivisionError
        ([14.0, 2.0111711894913896e154, 14.0, 14.0], [1.15e-170, 0.05, 0.05, 0.05]),
    ],
)
def test_edge_cases_match_the_reference(mus, errs):
    assert_same_as_reference(_members(mus, errs))


def test_one_to_three_stars_keep_everyone():
    for n in (1, 2, 3):
        members = _members([14.0, 30.0, -5.0][:n], [0.1, 0.01, 0.2][:n])
        result = class_distance("RRc", members)
        assert result.n_used == n and result.outliers == ()
        assert_same_as_reference(members)


def test_same_object_twice_is_left_out_twice_as_before():
    star = ("twin", 18.0, 0.05)
    members = [("a", 14.0, 0.05), star, ("b", 14.02, 0.05), star, ("c", 13.97, 0.05)]
    assert_same_as_reference(members)


@pytest.mark.slow  # several seconds; run by the slow suite
def test_random_fields_match_the_reference():
    rng = np.random.default_rng(20240611)
    for trial in range(300):
        n = int(rng.integers(1, 80))
        mus = rng.normal(16.0, 0.15, n)
        errs = rng.uniform(0.02, 0.3, n)
        bad = rng.random(n) < 0.15
        mus[bad] += rng.normal(0.0, 2.0, bad.sum())  # outliers of either sign
        if trial % 3 == 0:  # ties: repeat some stars' values exactly
            source = rng.integers(0, n, n // 3)
            target = rng.integers(0, n, n // 3)
            mus[target], errs[target] = mus[source], errs[source]
        if trial % 5 == 0:  # values on a coarse grid: many exact ties and symmetries
            mus = np.round(mus, 1)
            errs = np.round(errs, 1) + 0.1
        if trial % 7 == 0 and n:
            mus[rng.integers(0, n)] = math.nan
        if trial % 11 == 0 and n:
            errs[rng.integers(0, n)] = math.nan
        if trial % 13 == 0 and n:
            errs[rng.integers(0, n)] = 1e-4  # one star carrying almost all the weight
        assert_same_as_reference(_members(mus, errs))


@pytest.mark.slow  # several seconds; run by the slow suite
def test_a_larger_field_matches_the_reference():
    rng = np.random.default_rng(7)
    mus = np.concatenate([rng.normal(18.3, 0.2, 400), rng.normal(19.5, 0.3, 12)])
    errs = rng.uniform(0.03, 0.25, mus.size)
    order = rng.permutation(mus.size)
    members = _members(mus[order], errs[order])
    assert len(reference_class_distance("DCEP", members).outliers) > 3  # several rounds
    assert_same_as_reference(members)


def test_the_screen_leaves_only_a_few_stars_for_the_rule():
    # If the screen gave up (everyone a candidate) the result would still be
    # right but quadratic again; this guards the speed-up itself.
    rng = np.random.default_rng(3)
    mus = rng.normal(16.5, 0.1, 5000)
    mus[[10, 2000, 4000]] += (1.5, -1.2, 0.9)
    errs = rng.uniform(0.03, 0.2, 5000)
    errs[[10, 2000, 4000]] = 0.05  # so sigma is the scatter (about 0.1) for all three
    weights = np.array([_weight(e) for e in errs])
    assert list(_candidates(mus, errs, weights)) == [10]


def test_population_summary_matches_with_missing_and_nan_values(monkeypatch):
    rng = random.Random(11)
    stars = []
    for i in range(120):
        code = rng.choice(["RRab", "RRc", "DCEP", "EW"])
        mu = rng.gauss(17.0, 0.2) + (3.0 if rng.random() < 0.05 else 0.0)
        err = rng.choice([0.05, 0.1, 0.2, None, 0.0, math.nan])  # None and 0: no mu0
        value = rng.choice([mu, mu, mu, None, math.nan])
        values = (PhysicalValue("mu0", value, err, "mag", "test", "test"),)
        stars.append(StarPhysics(f"x{i}", code, rng.uniform(0.3, 0.7), values))
    got = population_summary(stars).to_dict()
    monkeypatch.setattr(population_module, "class_distance", reference_class_distance)
    want = population_summary(stars).to_dict()
    assert [d["class"] for d in got["distances"]] == [d["class"] for d in want["distances"]]
    for have, expect in zip(got["distances"], want["distances"], strict=True):
        assert have["outliers"] == expect["outliers"] and have["n_used"] == expect["n_used"]
        for key in ("mu0", "mu0_err", "scatter", "distance_pc"):
            assert _same_number(have[key], expect[key])


# --- property test -----------------------------------------------------------

_mu = st.one_of(
    st.sampled_from([14.0, 14.5, 15.0, 13.5, 20.0, 0.0, -1.0]),  # ties and symmetries
    st.floats(10.0, 25.0),
    st.floats(allow_nan=True, allow_infinity=True, width=64),
)
_err = st.one_of(
    st.sampled_from([0.05, 0.1, 0.2, 1.0, -0.05]),
    st.floats(1e-3, 2.0),
    st.floats(allow_nan=True, allow_infinity=True).filter(lambda e: e != 0.0),
)


@pytest.mark.slow  # several seconds; run by the slow suite
@settings(max_examples=400, deadline=None)
@given(st.lists(st.tuples(_mu, _err), min_size=0, max_size=25))
def test_property_same_result_as_the_reference(pairs):
    assert_same_as_reference([(f"p{i}", m, e) for i, (m, e) in enumerate(pairs)])
