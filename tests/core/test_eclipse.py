"""Eclipse test inputs on invented binaries and pulsators (injected truth checked)."""

from __future__ import annotations

import json

import numpy as np
import pytest

from phasewise.core.eclipse import (
    EclipseSettings,
    alternate_cycles_bins,
    alternate_cycles_decide,
    alternate_cycles_differ,
    eclipse_test,
)
from phasewise.core.errors import PhasewiseError, SettingsError
from phasewise.core.lightcurve import LightCurve

N = 700
P_ORB = 0.37  # invented binary, days
P_RR = 0.56  # invented RRab-like pulsator, days


def _times(seed=0):
    return np.sort(np.random.default_rng(seed).uniform(0, 200, N))


def _dip(phase, centre, width):
    d = np.mod(phase - centre + 0.5, 1.0) - 0.5
    return np.exp(-0.5 * (d / width) ** 2)


def _star(name, t, flux, noise=0.01, seed=1):
    mag = 13.0 - 2.5 * np.log10(flux) + np.random.default_rng(seed).normal(0, noise, t.size)
    return LightCurve(name, t, mag, np.full(t.size, noise))


def ew_curve():
    """Contact binary: continuous variation, two equal minima per orbit."""
    t = _times()
    ph = np.mod(t / P_ORB, 1)
    flux = 1 - 0.1 * (1 - np.cos(4 * np.pi * ph)) - 0.05 * (_dip(ph, 0, 0.08) + _dip(ph, 0.5, 0.08))
    return _star("demo-ew", t, flux)


def eb_curve():
    """Beta Lyrae-like: continuous variation, unequal minima."""
    t = _times(2)
    ph = np.mod(t / P_ORB, 1)
    flux = 1 - 0.05 * (1 - np.cos(4 * np.pi * ph)) - 0.25 * _dip(ph, 0, 0.07)
    return _star("demo-eb", t, flux - 0.12 * _dip(ph, 0.5, 0.07))


def ea_curve():
    """Detached binary: flat outside narrow, unequal eclipses."""
    t = _times(3)
    ph = np.mod(t / P_ORB, 1)
    return _star("demo-ea", t, 1 - 0.5 * _dip(ph, 0, 0.025) - 0.2 * _dip(ph, 0.5, 0.025))


def rrab_curve():
    """Sawtooth pulsator: brightens in 0.15 of a cycle, fades slowly."""
    t = _times(4)
    x = np.mod(t / P_RR, 1)
    mag = np.where(x < 0.15, 0.4 - x / 0.15 * 0.8, -0.4 + (x - 0.15) / 0.85 * 0.8)
    return _star("demo-rrab", t, 10 ** (-0.4 * mag))


def test_ew_at_half_its_period_has_equal_minima_and_a_strong_second_harmonic():
    res = eclipse_test(ew_curve(), 2 / P_ORB)  # the half period a periodogram finds
    assert res.doubled_period == pytest.approx(P_ORB)
    assert res.depth_primary > 0.15 and res.depth_secondary > 0.15
    assert abs(res.depth_difference) < 0.01
    assert res.depth_difference_sigma < 3 and not res.unequal_minima
    assert res.second_harmonic_ratio > 10
    assert res.odd_harmonic_fraction < 0.01
    assert res.phase_separation == pytest.approx(0.5, abs=0.01)
    assert res.symmetric and res.asymmetry < 0.05
    assert res.symmetric_equal_minima


@pytest.mark.parametrize("make", [eb_curve, ea_curve], ids=["EB", "EA"])
def test_unequal_minima_give_a_significant_depth_difference(make):
    lc = make()
    res = eclipse_test(lc, 2 / P_ORB)
    assert res.unequal_minima
    assert res.depth_difference_sigma > 10
    assert res.depth_difference > 0.1
    assert res.phase_separation == pytest.approx(0.5, abs=0.02)
    assert res.odd_harmonic_fraction > 0.1
    assert not res.symmetric_equal_minima
    # tested at the orbital period itself: the second dip shows at P
    at_p = eclipse_test(lc, 1 / P_ORB)
    assert not at_p.unequal_minima  # both folds at 2P show the primary eclipse
    assert at_p.depth_secondary_at_p is not None and at_p.depth_secondary_at_p > 0.05


def test_ea_depths_come_back_near_the_injected_ones():
    res = eclipse_test(ea_curve(), 2 / P_ORB)
    # injected: fluxes 0.5 and 0.8 at mid-eclipse -> 0.753 and 0.242 mag;
    # a finite Fourier series rounds narrow eclipses, so allow 10 %
    assert res.depth_primary == pytest.approx(-2.5 * np.log10(0.5), rel=0.1)
    assert res.depth_secondary == pytest.approx(-2.5 * np.log10(0.8), rel=0.1)


def test_sawtooth_pulsator_is_told_from_a_contact_binary():
    rr = eclipse_test(rrab_curve(), 1 / P_RR)
    ew = eclipse_test(ew_curve(), 2 / P_ORB)
    # both repeat exactly at P: no odd harmonics at 2P, equal alternate minima
    assert not rr.unequal_minima and rr.odd_harmonic_fraction < 0.01
    # but the pulsator is strongly asymmetric about minimum light
    assert not rr.symmetric and rr.asymmetry > 0.3
    assert rr.asymmetry > 5 * ew.asymmetry
    # injected rise 0.15; a series of order <= 8 rounds the corners of the
    # sawtooth and moves both extremes a little, lengthening the rise
    assert 0.12 < rr.rise_time < 0.25
    assert ew.rise_time == pytest.approx(0.5, abs=0.02)
    assert not rr.symmetric_equal_minima
    assert rr.depth_secondary_at_p is None or rr.depth_secondary_at_p < 0.02


def test_a_given_fit_at_the_period_is_reused():
    from phasewise.core.fourier import decompose

    lc = rrab_curve()
    fit = decompose(lc, 1 / P_RR)["V"]
    reused = eclipse_test(lc, 1 / P_RR, fit_at_period=fit)
    assert reused.rise_time == fit.rise_time
    assert reused.asymmetry == pytest.approx(eclipse_test(lc, 1 / P_RR).asymmetry, abs=0.05)


def test_to_dict_is_plain_and_complete():
    d = eclipse_test(ew_curve(), 2 / P_ORB).to_dict()
    json.dumps(d)
    for key in (
        "depth_primary",
        "depth_secondary",
        "depth_difference",
        "depth_difference_err",
        "second_harmonic_ratio",
        "odd_harmonic_fraction",
        "asymmetry",
        "unequal_minima",
        "symmetric_equal_minima",
    ):
        assert key in d
    assert isinstance(d["unequal_minima"], bool)


def test_bad_input_is_refused_clearly():
    with pytest.raises(PhasewiseError, match="field 'frequency'"):
        eclipse_test(ew_curve(), 0.0)
    t = np.linspace(0, 1, 5)
    with pytest.raises(PhasewiseError, match="cannot support"):
        eclipse_test(LightCurve("demo-few", t, np.ones(5)), 2.0)
    with pytest.raises(SettingsError, match="field 'max_order'"):
        EclipseSettings(max_order=1)


def test_fourier_ringing_is_not_a_secondary_minimum():
    """A narrow single eclipse at its own period: the Fourier series rings, but
    no second dip is reported; a real 40% secondary is."""
    t = _times(5)
    ph = np.mod(t / P_ORB, 1)
    single = _star("demo-ea-single", t, 1 - 0.5 * _dip(ph, 0, 0.02))
    double = _star("demo-ea-double", t, 1 - 0.5 * _dip(ph, 0, 0.02) - 0.2 * _dip(ph, 0.5, 0.02))
    assert eclipse_test(single, 1 / P_ORB).depth_secondary_at_p is None
    second = eclipse_test(double, 1 / P_ORB).depth_secondary_at_p
    injected = 2.5 * np.log10(1 / (1 - 0.2))  # 0.24 mag
    assert second == pytest.approx(injected, rel=0.3)
    with pytest.raises(SettingsError, match="secondary_fraction"):
        EclipseSettings(secondary_fraction=1.5)


def test_alternate_dips_are_told_by_the_points_not_by_one_outlier():
    # invented recovery check: a narrow eclipse every other cycle of P is
    # 0.3 mag deeper than on the cycles between; one outlier alone is not
    from phasewise.core.eclipse import _alternate_dips_differ
    from phasewise.core.fourier import fit_fourier

    rng = np.random.default_rng(11)
    period = 0.8
    t = np.sort(rng.uniform(0.0, 400.0, 900))
    cycle = t / period
    phase = (cycle + 0.5) % 1.0 - 0.5
    odd = np.mod(np.round(cycle), 2.0) == 1
    depth = np.where(odd, 0.3, 0.6)
    m = 15.0 + depth * np.exp(-0.5 * (phase / 0.04) ** 2) + rng.normal(0, 0.01, t.size)
    e = np.full(t.size, 0.01)
    fit = fit_fourier(t, m, e, 1.0 / period, 8)
    faint = -fit.rise_time
    settings = EclipseSettings()
    assert _alternate_dips_differ(t, m, fit, faint, settings)
    equal = 15.0 + 0.45 * np.exp(-0.5 * (phase / 0.04) ** 2) + rng.normal(0, 0.01, t.size)
    in_dip = np.flatnonzero(np.abs(phase) < 0.02)
    equal[in_dip[0]] += 1.2  # one bad point in the dip
    fit_equal = fit_fourier(t, equal, e, 1.0 / period, 8)
    assert not _alternate_dips_differ(t, equal, fit_equal, -fit_equal.rise_time, settings)


# ---------------------------------------------- alternate cycles in phase bins
def _alternating(depth2, n=700, width=0.02, seed=3, period=2.3, noise=0.01):
    """An invented Algol: primary 0.5 in flux at phase 0, ``depth2`` at 0.5."""
    t = np.sort(np.random.default_rng(seed).uniform(0, 300, n))
    phase = t / period
    flux = 1.0 - 0.5 * _dip(phase, 0.0, width) - depth2 * _dip(phase, 0.5, width)
    lc = _star("ALT", t, flux, noise=noise, seed=seed)
    return lc.arrays()[0], lc.arrays()[1], lc.arrays()[2], period


def test_alternate_cycles_differ_at_half_an_orbit_of_unequal_eclipses():
    # folded at half the orbit, odd cycles hold the primary, even the secondary
    t, m, e, period = _alternating(depth2=0.2)
    f_half = 2.0 / period
    assert alternate_cycles_differ(t, m, e, f_half, alternate_cycles_bins(t.size), 3.0, 0.1)


def test_alternate_cycles_agree_at_half_an_orbit_of_equal_eclipses_and_at_the_orbit():
    t, m, e, period = _alternating(depth2=0.5)
    assert alternate_cycles_differ(t, m, e, 2.0 / period, 35, 3.0, 0.1) is False
    t, m, e, period = _alternating(depth2=0.0)  # one eclipse a cycle, at its period
    assert alternate_cycles_differ(t, m, e, 1.0 / period, 35, 3.0, 0.1) is False


def test_alternate_cycles_undecided_without_points_in_the_eclipse_of_each_parity():
    # 40 points: the eclipse bin never holds two points of each parity
    t, m, e, period = _alternating(depth2=0.2, n=40, width=0.005)
    assert alternate_cycles_differ(t, m, e, 2.0 / period, 20, 3.0, 0.1) is None
    assert alternate_cycles_decide(40) is False and alternate_cycles_decide(700) is True


def test_one_eclipse_a_cycle_at_its_period_is_not_doubled():
    # a narrow eclipse no Fourier series follows: its two "minima" at 2P are
    # the same eclipse, and the binned comparison says so
    t, m, e, period = _alternating(depth2=0.0, width=0.01)
    lc = LightCurve("ONE", t, m, e)
    assert eclipse_test(lc, 1.0 / period).unequal_minima is False
