"""Time-scale conversions, checked against astropy.time and a classical formula.

The star position (RA 150.0, Dec -30.0) and the dates are INVENTED for the
tests; the observatory is the fictional demo site ``DEMO_OBSERVATORY``.
"""

import astropy.units as u
import numpy as np
import pytest
from astropy.coordinates import SkyCoord
from astropy.time import Time

from phasewise.core.errors import PhasewiseError
from phasewise.core.timescales import DEMO_OBSERVATORY, MJD_OFFSET, convert_times

RA, DEC = 150.0, -30.0  # invented
JD = np.array([2459580.5, 2459671.25, 2459762.75, 2459853.125, 2460100.6])  # invented dates


def test_demo_observatory_is_where_we_said():
    lon, lat, height = DEMO_OBSERVATORY.to_geodetic()
    assert lon.deg == pytest.approx(-70.7) and lat.deg == pytest.approx(-29.5)
    assert height.to_value(u.m) == pytest.approx(2300.0)


def test_jd_mjd_exact():
    mjd = convert_times(JD, "JD", "MJD")
    assert np.array_equal(mjd, JD - 2400000.5)
    assert np.array_equal(convert_times(mjd, "MJD", "JD"), JD)
    assert MJD_OFFSET == 2400000.5
    assert convert_times(2400000.5, "JD", "MJD") == 0.0  # a scalar stays a scalar


def test_bjd_tdb_matches_an_independent_astropy_computation():
    # reference: astropy.time written out by hand, BJD_TDB = JD(TDB) + barycentric light time
    star = SkyCoord(RA * u.deg, DEC * u.deg, frame="icrs")
    t = Time(JD, format="jd", scale="utc", location=DEMO_OBSERVATORY)
    expected = (t.tdb + t.light_travel_time(star, kind="barycentric", ephemeris="builtin")).jd
    got = convert_times(JD, "JD", "BJD_TDB", ra=RA, dec=DEC, location=DEMO_OBSERVATORY)
    assert got == pytest.approx(expected, abs=1e-8, rel=0)  # 1 ms
    # TDB - UTC is 69.18 s from 2017 (37 leap s + 32.184 s): common practice, no source
    barycentric = t.light_travel_time(star, kind="barycentric", ephemeris="builtin").to_value(u.d)
    assert (got - JD - barycentric) * 86400 == pytest.approx(69.184, abs=0.002)


def test_hjd_matches_astropy_and_the_low_precision_sun():
    star = SkyCoord(RA * u.deg, DEC * u.deg, frame="icrs")
    t = Time(JD, format="jd", scale="utc", location=DEMO_OBSERVATORY)
    expected = JD + t.light_travel_time(star, kind="heliocentric", ephemeris="builtin").to_value(
        u.d
    )
    got = convert_times(JD, "JD", "HJD", ra=RA, dec=DEC, location=DEMO_OBSERVATORY)
    assert got == pytest.approx(expected, abs=1e-8, rel=0)
    # Independent check: the Astronomical Almanac's low-precision Sun position
    # (about 0.01 deg; coefficients from memory).  HJD - JD = -(R_sun . n_star) / c.
    n = JD - 2451545.0
    mean_lon = np.radians(280.460 + 0.9856474 * n)
    anomaly = np.radians(357.528 + 0.9856003 * n)
    lam = mean_lon + np.radians(1.915 * np.sin(anomaly) + 0.020 * np.sin(2 * anomaly))
    radius = 1.00014 - 0.01671 * np.cos(anomaly) - 0.00014 * np.cos(2 * anomaly)
    eps = np.radians(23.439 - 0.0000004 * n)
    sun = radius * np.array([np.cos(lam), np.cos(eps) * np.sin(lam), np.sin(eps) * np.sin(lam)])
    ra, dec = np.radians(RA), np.radians(DEC)
    unit = np.array([np.cos(dec) * np.cos(ra), np.cos(dec) * np.sin(ra), np.sin(dec)])
    au_light_days = 499.004784 / 86400  # light time for 1 au (IAU 2012 au / c)
    classical = JD - (unit @ sun) * au_light_days
    assert (got - classical) * 86400 == pytest.approx(np.zeros(JD.size), abs=3.0)  # seconds
    assert np.all(np.abs(got - JD) < 0.0058)  # at most ~8.3 min (1 au / c)


@pytest.mark.parametrize("scale", ["HJD", "BJD_TDB", "MJD"])
def test_inverse_conversion_returns_the_input(scale):
    kwargs = {"ra": RA, "dec": DEC, "location": DEMO_OBSERVATORY}
    there = convert_times(JD, "JD", scale, **kwargs)
    back = convert_times(there, scale, "JD", **kwargs)
    assert back == pytest.approx(JD, abs=2e-9, rel=0)  # 0.2 ms, float64 resolution at JD 2.46e6


def test_hjd_to_bjd_goes_through_jd():
    kwargs = {"ra": RA, "dec": DEC, "location": DEMO_OBSERVATORY}
    hjd = convert_times(JD, "JD", "HJD", **kwargs)
    bjd = convert_times(hjd, "HJD", "BJD_TDB", **kwargs)
    direct = convert_times(JD, "JD", "BJD_TDB", **kwargs)
    assert bjd == pytest.approx(direct, abs=2e-9, rel=0)


def test_nan_times_stay_nan():
    out = convert_times([JD[0], np.nan], "JD", "HJD", ra=RA, dec=DEC, location=DEMO_OBSERVATORY)
    assert np.isfinite(out[0]) and np.isnan(out[1])


def test_barycentric_conversion_needs_coordinates_and_location():
    with pytest.raises(
        PhasewiseError,
        match=r"field 'ra/dec': converting JD -> BJD_TDB needs the star's coordinates",
    ):
        convert_times(JD, "JD", "BJD_TDB", location=DEMO_OBSERVATORY)
    with pytest.raises(
        PhasewiseError,
        match=r"field 'location': converting HJD -> MJD needs the observatory location",
    ):
        convert_times(JD, "HJD", "MJD", ra=RA, dec=DEC)
    with pytest.raises(PhasewiseError, match=r"bad coordinates"):
        convert_times(JD, "JD", "HJD", ra=RA, dec=95.0, location=DEMO_OBSERVATORY)


def test_unknown_scale_is_named():
    with pytest.raises(PhasewiseError, match=r"field 'to_scale': unknown time scale 'TT'"):
        convert_times(JD, "JD", "TT")


def test_a_light_curve_converts_with_its_own_coordinates():
    from phasewise.core.lightcurve import LightCurve, StarMeta
    from phasewise.core.timescales import to_time_scale

    lc = LightCurve(
        "CAV-1", JD, np.full(JD.size, 15.0), time_scale="JD", meta=StarMeta(ra=RA, dec=DEC)
    )
    bjd = to_time_scale(lc, "BJD_TDB", location=DEMO_OBSERVATORY)
    assert bjd.time_scale == "BJD_TDB" and not bjd.has_errors
    assert np.array_equal(
        bjd.time, convert_times(JD, "JD", "BJD_TDB", ra=RA, dec=DEC, location=DEMO_OBSERVATORY)
    )
    assert "JD -> BJD_TDB" in bjd.meta.notes[-1]
    bare = LightCurve("CAV-2", JD, np.full(JD.size, 15.0), time_scale="JD")
    with pytest.raises(PhasewiseError, match=r"needs the star's coordinates"):
        to_time_scale(bare, "HJD", location=DEMO_OBSERVATORY)
