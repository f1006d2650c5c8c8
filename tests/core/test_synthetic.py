"""Tests of the synthetic sky generator and of the committed demo survey."""

from __future__ import annotations

import importlib.util
from collections import Counter
from pathlib import Path

import numpy as np
import pytest
from astropy.table import Table
from astropy.timeseries import LombScargle

from phasewise.core import synthetic as syn
from phasewise.core.errors import SettingsError
from phasewise.core.lightcurve import LightCurve

ROOT = Path(__file__).resolve().parents[2]
DEMO = ROOT / "demo_data"


def _load_make_demo():
    spec = importlib.util.spec_from_file_location("make_demo", DEMO / "make_demo.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


@pytest.fixture(scope="module")
def survey():
    return syn.make_survey(n_stars=300, seed=11)


def _truth(survey, code):
    return [s for s in survey.stars if s.truth.class_code == code]


# ------------------------------------------------------------ determinism
def test_same_seed_same_survey():
    a = syn.make_survey(n_stars=30, seed=5)
    b = syn.make_survey(n_stars=30, seed=5)
    for la, lb in zip(a.lightcurves, b.lightcurves, strict=True):
        assert la.star_id == lb.star_id
        np.testing.assert_array_equal(la.time, lb.time)
        np.testing.assert_array_equal(la.mag, lb.mag)
        np.testing.assert_array_equal(la.mag_err, lb.mag_err)
        np.testing.assert_array_equal(la.band, lb.band)
    assert a.truth == b.truth


def test_other_seed_other_survey():
    a = syn.make_survey(n_stars=30, seed=5)
    b = syn.make_survey(n_stars=30, seed=6)
    assert not np.array_equal(a.lightcurves[0].mag[:50], b.lightcurves[0].mag[:50])


def test_field_is_deterministic_and_shaped():
    a = syn.synthetic_field(40, n_epochs=700, seed=3)
    b = syn.synthetic_field(40, n_epochs=700, seed=3)
    assert a.time.shape == (700,) and a.shared_epochs
    assert a.mag.shape == a.mag_err.shape == (40, 700)
    np.testing.assert_array_equal(a.mag, b.mag)
    assert np.all(np.diff(a.time) > 0)
    missing = np.isnan(a.mag).mean(axis=1)
    assert missing.max() <= 0.2 and missing.mean() > 0.0
    # NaN in the same places in mag and mag_err, so zero weight is well defined
    np.testing.assert_array_equal(np.isnan(a.mag), np.isnan(a.mag_err))
    curves = a.lightcurves()
    assert len(curves) == 40 and all(isinstance(c, LightCurve) for c in curves)
    assert curves[0].n_points == int(np.isfinite(a.mag[0]).sum())


def test_field_with_own_epochs():
    f = syn.synthetic_field(5, n_epochs=300, seed=4, shared_epochs=False)
    assert f.time.shape == (5, 300) and not f.shared_epochs
    assert not np.array_equal(f.time[0], f.time[1])


# ------------------------------------------------------------ proportions
def test_class_counts_sum_and_default_table():
    assert syn.class_counts(300) == syn.CLASS_WEIGHTS
    for n in (1, 17, 299, 1000, 12345):
        assert sum(syn.class_counts(n).values()) == n


def test_class_proportions_of_a_cluster_field(survey):
    counts = Counter(t.class_code for t in survey.truth)
    n = len(survey.truth)
    rr = counts["RRab"] + counts["RRc"] + counts["RRd"]
    # mostly RR Lyrae, RRab more than RRc, few RRd (typical of a globular
    # cluster census; common practice, no source)
    assert 0.35 < rr / n < 0.6
    assert counts["RRab"] > counts["RRc"] > counts["RRd"] > 0
    assert 0.15 < counts["NONVAR"] / n < 0.4
    assert counts["EW"] + counts["EB"] + counts["EA"] >= 30
    for code in ("DCEP", "T2CEP", "ACEP", "DSCT", "LPV"):
        assert 1 <= counts[code] <= 15, code
    subtypes = {(t.class_code, t.subtype) for t in survey.truth}
    assert {("DCEP", "F"), ("DCEP", "1O"), ("T2CEP", "RVTAU"), ("LPV", "MIRA")} <= subtypes


def test_bad_requests_name_the_field():
    with pytest.raises(SettingsError, match="n_stars"):
        syn.class_counts(0)
    with pytest.raises(SettingsError, match="unknown class 'XYZ'"):
        syn.draw_star(np.random.default_rng(1), "X1", "XYZ")
    with pytest.raises(SettingsError, match="n_epochs"):
        syn.synthetic_field(3, n_epochs=5)


# ---------------------------------------------------------------- cadence
def test_cadence_has_seasons_and_nightly_visits():
    time, band = syn.make_cadence(np.random.default_rng(2))
    gaps = np.diff(time)
    # three seasons: two long gaps while the field is behind the Sun
    assert np.count_nonzero(gaps > 90) == 2
    assert 600 < time[-1] - time[0] < 1100
    # several visits per clear night: many gaps shorter than a night
    assert np.count_nonzero(gaps < 0.4) > 0.5 * time.size
    assert np.count_nonzero(band == "V") > 1.5 * np.count_nonzero(band == "I") > 0
    # every visit at night: within 6 h of local solar midnight at the site
    local = (time - 0.5 + syn.SITE.longitude / 360.0) % 1.0  # 0 at local midnight
    hours = np.where(local > 0.5, local - 1.0, local) * 24.0
    assert np.all(np.abs(hours) < 6.5)


def test_window_function_peaks_at_one_cycle_per_day():
    # spectral window via astropy's reference LombScargle of a constant with
    # no mean fit (common practice, no source): nightly sampling gives the
    # strongest peak away from zero near 1 c/d (1 sidereal day^-1 = 1.0027)
    time, _ = syn.make_cadence(np.random.default_rng(8))
    freq = np.linspace(0.3, 3.0, 20000)
    ls = LombScargle(time, np.ones_like(time), fit_mean=False, center_data=False)
    power = ls.power(freq, method="slow")
    assert abs(freq[np.argmax(power)] - 1.0) < 0.01


# -------------------------------------------------------------- truth
def test_lightcurves_and_truth_agree(survey):
    for lc, star in zip(survey.lightcurves, survey.stars, strict=True):
        assert lc.star_id == star.truth.star_id
        assert lc.time_scale == "HJD"
        assert set(lc.bands) == {"V", "I"}
        assert lc.meta.ra == star.truth.ra and lc.meta.dec == star.truth.dec
    ids = [lc.star_id for lc in survey.lightcurves]
    assert len(set(ids)) == len(ids) and ids[0] == "CAL-V001"
    n_v = np.mean([np.count_nonzero(lc.band == "V") for lc in survey.lightcurves])
    n_i = np.mean([np.count_nonzero(lc.band == "I") for lc in survey.lightcurves])
    assert 70 < n_v < 160 and 25 < n_i < 80


def test_periods_and_ratios_in_class_ranges(survey):
    ranges = {
        "RRab": (0.45, 0.8),
        "RRc": (0.25, 0.42),
        "DSCT": (0.03, 0.2),  # Poro et al. 2024: 0.02-0.25 d
        "EW": (0.25, 0.6),
    }
    for code, (lo, hi) in ranges.items():
        periods = [s.truth.period for s in _truth(survey, code)]
        assert periods and lo <= min(periods) and max(periods) <= hi, code
    for star in _truth(survey, "RRd"):
        # P1/P0 of RRd: 0.742-0.748 (Soszynski et al. 2016)
        assert 0.742 <= star.truth.period / star.truth.period2 <= 0.748
    for star in _truth(survey, "DCEP"):
        lo, hi = (3.0, 30.0) if star.truth.subtype == "F" else (1.0, 5.0)
        assert lo <= star.truth.period <= hi
    for star in _truth(survey, "T2CEP"):
        # type II subclasses by period (Matsunaga, Feast & Menzies 2009)
        p = star.truth.period
        ok = {"BLHER": p < 4, "WVIR": 4 <= p <= 20, "RVTAU": p > 20}
        assert ok[star.truth.subtype]
    for star in _truth(survey, "LPV"):
        if star.truth.subtype == "MIRA":
            assert 150 <= star.truth.period <= 400 and star.truth.amplitude_V >= 2.5


def test_blazhko_flags(survey):
    rrab = _truth(survey, "RRab")
    share = np.mean([s.truth.blazhko for s in rrab])
    assert 0.15 < share < 0.6
    for s in survey.stars:
        assert s.truth.blazhko == np.isfinite(s.truth.blazhko_period)
        assert not s.truth.blazhko or s.truth.class_code == "RRab"


def _fourier_fit(time, mag, period, order):
    """Sine-form Fourier parameters by linear least squares (numpy lstsq)."""
    phase = 2 * np.pi * time / period
    cols = [np.ones_like(time)]
    for k in range(1, order + 1):
        cols += [np.sin(k * phase), np.cos(k * phase)]
    coef = np.linalg.lstsq(np.array(cols).T, mag, rcond=None)[0]
    amps = np.hypot(coef[1::2], coef[2::2])
    phis = np.arctan2(
        coef[2::2], coef[1::2]
    )  # A sin(x + phi) = A cos(phi) sin x + A sin(phi) cos x
    return amps, phis


def test_fourier_truth_is_recovered_from_the_model(survey):
    # recovery test: fit the noise-free V model of stable RR Lyrae and compare
    # with the injected R21 and phi31 (sine form) and peak-to-peak amplitude
    checked = 0
    for star in _truth(survey, "RRab")[:10] + _truth(survey, "RRc")[:10]:
        t = star.truth
        if t.blazhko:
            continue
        time = t.epoch + np.linspace(0.0, t.period, 400, endpoint=False)
        mag = star.model(time, "V")
        amps, phis = _fourier_fit(time, mag, t.period, 8)
        assert amps[1] / amps[0] == pytest.approx(t.R21, abs=1e-3)
        phi31 = (phis[2] - 3 * phis[0]) % (2 * np.pi)
        assert np.angle(np.exp(1j * (phi31 - t.phi31))) == pytest.approx(0.0, abs=1e-3)
        assert mag.max() - mag.min() == pytest.approx(t.amplitude_V, rel=1e-3)
        # phase 0 is maximum light
        assert np.argmin(mag) in (0, 1, 399)
        checked += 1
    assert checked >= 10


def test_rr_lyrae_phi31_matches_the_cluster_metallicity(survey):
    feh = survey.cluster.feh_zw
    for star in _truth(survey, "RRab"):
        t = star.truth
        # Jurcsik & Kovacs 1996 and Jurcsik 1995 (JK -> ZW), REFERENCES.md
        feh_jk = -5.038 - 5.394 * t.period + 1.345 * t.phi31
        assert 0.6988 * feh_jk - 0.615 == pytest.approx(feh, abs=0.35)
    for star in _truth(survey, "RRc"):
        t = star.truth
        p, phi = t.period, (t.phi31 + np.pi) % (2 * np.pi)  # sine -> cosine (REFERENCES.md)
        # Morgan, Wahl & Wieckhorst 2007, cosine form
        zw = 52.466 * p**2 - 30.075 * p + 0.131 * phi**2 + 0.982 * phi - 4.198 * p * phi + 2.424
        assert zw == pytest.approx(feh, abs=0.4)
        assert 0.1 <= t.R21 <= 0.2


def test_members_sit_at_one_distance(survey):
    c = survey.cluster
    # Chaboyer 1999 M_V-[Fe/H], plus the cluster's modulus and extinction
    v_hb = 0.23 * (c.feh_zw + 1.6) + 0.56 + c.distance_modulus + c.a_v
    for star in _truth(survey, "RRab") + _truth(survey, "RRc"):
        assert star.truth.member
        # mean magnitude, not intensity mean; allow for evolution and shape
        assert star.truth.mean_V == pytest.approx(v_hb, abs=0.35)
    # type II Cepheids are members: brighter at longer period (a
    # period-luminosity slope at one distance)
    t2 = [s.truth for s in _truth(survey, "T2CEP")]
    assert all(t.member for t in t2)
    slope = np.polyfit(np.log10([t.period for t in t2]), [t.mean_V for t in t2], 1)[0]
    assert slope < -1.0
    # classical Cepheids are young: field stars behind the cluster
    assert all(not s.truth.member for s in _truth(survey, "DCEP"))


def test_colours_and_band_amplitudes(survey):
    for star in _truth(survey, "RRab"):
        t = star.truth
        # A_I/A_V ~ 0.6 for RR Lyrae (from memory)
        assert 0.5 < t.amplitude_I / t.amplitude_V < 0.7
        assert 0.4 < t.mean_V - t.mean_I < 0.9
    for star in _truth(survey, "LPV"):
        assert star.truth.mean_V - star.truth.mean_I > 1.5


def test_nonvariables_scatter_like_their_errors(survey):
    pulls, mean_mags, scatter = [], [], []
    for lc, star in zip(survey.lightcurves, survey.stars, strict=True):
        if star.truth.class_code != "NONVAR":
            continue
        t, m, e = lc.arrays("V")
        dev = m - star.truth.mean_V
        keep = np.abs(dev) < 0.25  # drop the injected outliers
        pulls.append(dev[keep] / e[keep])
        mean_mags.append(star.truth.mean_V)
        scatter.append(np.std(dev[keep]))
    pulls = np.concatenate(pulls)
    # reported errors match the scatter: unit-variance pulls
    assert np.std(pulls) == pytest.approx(1.0, abs=0.1)
    # noise grows with magnitude (rank correlation of scatter with mean V)
    order = np.argsort(mean_mags)
    ranks = np.empty(len(order))
    ranks[order] = np.arange(len(order))
    srank = np.argsort(np.argsort(scatter))
    assert np.corrcoef(ranks, srank)[0, 1] > 0.8


def test_noise_model_grows_with_magnitude():
    mags = np.linspace(12.0, 21.0, 50)
    for band in ("V", "I"):
        sigma = syn.noise_sigma(mags, band)
        assert np.all(np.diff(sigma) > 0)
        # bright end at the floor; faint end photon/sky limited
        assert sigma[0] == pytest.approx(syn.NoiseModel().floor, rel=0.2)
        assert sigma[-1] > 0.1
    # faint stars: sigma ~ sqrt(sky)/N grows by 10^(0.4) per magnitude (CCD equation)
    ratio = syn.noise_sigma(np.array([21.0]), "V") / syn.noise_sigma(np.array([20.0]), "V")
    assert ratio[0] == pytest.approx(10**0.4, rel=0.1)


def test_outliers_are_few_and_recorded(survey):
    counts = np.array([t.n_outliers for t in survey.truth])
    assert 0.5 < counts.mean() < 2.0 and counts.max() <= 8


# ------------------------------------------------------- committed demo
@pytest.mark.slow  # several seconds; run by the slow suite
def test_committed_demo_matches_generator(tmp_path):
    make_demo = _load_make_demo()
    make_demo.write_demo(tmp_path)
    for name in (f"{make_demo.LONG_NAME}.ecsv", f"{make_demo.LONG_NAME}.csv", make_demo.TRUTH_NAME):
        fresh = Table.read(
            tmp_path / name, format="ascii.ecsv" if name.endswith(".ecsv") else "ascii.csv"
        )
        kept = Table.read(
            DEMO / name, format="ascii.ecsv" if name.endswith(".ecsv") else "ascii.csv"
        )
        assert fresh.colnames == kept.colnames and len(fresh) == len(kept), name
        for col in fresh.colnames:
            a, b = np.asarray(fresh[col]), np.asarray(kept[col])
            if a.dtype.kind == "f":
                # one unit in the last written digit, against libm differences
                np.testing.assert_allclose(
                    a, b, rtol=0, atol=2e-3, equal_nan=True, err_msg=f"{name}:{col}"
                )
            else:
                np.testing.assert_array_equal(a, b, err_msg=f"{name}:{col}")
    fresh_files = sorted(p.name for p in (tmp_path / make_demo.STARS_DIR).iterdir())
    kept_files = sorted(p.name for p in (DEMO / make_demo.STARS_DIR).iterdir())
    assert fresh_files == kept_files and len(kept_files) == make_demo.N_STARS


def test_committed_demo_forms_agree_and_are_small():
    make_demo = _load_make_demo()
    long_ecsv = Table.read(DEMO / f"{make_demo.LONG_NAME}.ecsv")
    long_csv = Table.read(DEMO / f"{make_demo.LONG_NAME}.csv", format="ascii.csv")
    assert long_ecsv.meta["time_scale"] == "HJD"
    assert str(long_ecsv["hjd"].unit) == "d"
    for col in long_ecsv.colnames:
        np.testing.assert_array_equal(np.asarray(long_ecsv[col]), np.asarray(long_csv[col]))
    one = Table.read(DEMO / make_demo.STARS_DIR / "CAL-V007.csv", format="ascii.csv")
    rows = long_ecsv[long_ecsv["star_id"] == "CAL-V007"]
    np.testing.assert_array_equal(np.asarray(one["hjd"]), np.asarray(rows["hjd"]))
    np.testing.assert_array_equal(np.asarray(one["mag"]), np.asarray(rows["mag"]))
    # the demo ledger that ``phasewise demo`` builds beside the survey is not committed
    total = sum(
        p.stat().st_size for p in DEMO.rglob("*") if p.is_file() and ".ledger.sqlite" not in p.name
    )
    assert total < 6.5e6
    truth = Table.read(DEMO / make_demo.TRUTH_NAME, format="ascii.csv")
    assert len(truth) == make_demo.N_STARS
    assert set(truth["star_id"]) == set(long_ecsv["star_id"])


def _phase_curve(star, cycles=1.0, n=4000):
    t = star.truth
    phase = np.linspace(0.0, cycles, n, endpoint=False)
    return phase, star.model(t.epoch + phase * t.period, "V")


def test_eclipsing_shapes(survey):
    for star in _truth(survey, "EW") + _truth(survey, "EA"):
        phase, mag = _phase_curve(star)
        top = mag.min()  # maximum light
        primary = mag[0] - top  # epoch is primary minimum
        near_half = (phase > 0.35) & (phase < 0.65)
        secondary = mag[near_half].max() - top
        assert mag[0] == pytest.approx(mag.max(), abs=1e-4)  # deepest point at the epoch
        if star.truth.class_code == "EW":
            assert secondary / primary > 0.8  # (nearly) equal minima
        else:
            # narrow eclipses: most of the cycle is within 0.02 mag of maximum light
            assert np.mean(mag - mag.min() < 0.02) > 0.6
            assert secondary < primary  # unequal depths


def test_pulsator_shapes(survey):
    for star in _truth(survey, "T2CEP"):
        if star.truth.subtype != "RVTAU":
            continue
        phase, mag = _phase_curve(star)
        first = mag[(phase > 0.1) & (phase < 0.4)].max()
        second = mag[(phase > 0.6) & (phase < 0.9)].max()
        assert abs(first - second) > 0.1 * star.truth.amplitude_V  # alternating minima
    for star in _truth(survey, "DSCT"):
        t = star.truth
        if t.subtype == "HADS":
            assert t.amplitude_V > 0.3  # HADS above 0.3 mag (Poro et al. 2024)
        else:
            assert t.amplitude_V < 0.2
    rises = []
    for star in _truth(survey, "RRab"):
        if star.truth.blazhko:
            continue
        phase, mag = _phase_curve(star)
        rises.append((1.0 - phase[np.argmax(mag)]) % 1.0)
    # steep rise: minimum to maximum light in ~0.15-0.2 of a cycle for most
    # RRab (from memory)
    assert np.median(rises) < 0.22 and np.percentile(rises, 90) < 0.26


def test_every_model_is_finite_in_both_bands(survey):
    time = np.linspace(survey.lightcurves[0].time[0], survey.lightcurves[0].time[-1], 500)
    for star in survey.stars:
        for band in ("V", "I"):
            assert np.all(np.isfinite(star.model(time, band))), star.truth.star_id


def test_field_follows_the_class_mix():
    f = syn.synthetic_field(120, n_epochs=200, seed=9)
    counts = Counter((t.class_code, t.subtype) for t in f.truth)
    assert counts == Counter({k: v for k, v in syn.class_counts(120).items() if v})
