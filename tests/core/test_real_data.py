"""A real, openly published time series with a known period.

The yearly sunspot numbers 1700-2008 ship with statsmodels
(``statsmodels.datasets.sunspots``, public domain, from NOAA NGDC).  Their
dominant period is the Schwabe cycle of about 11 years (Hathaway 2015, Living
Reviews in Solar Physics 12, 4: mean cycle length near 11 yr; value quoted
from memory).  The series is not photometry, but a periodogram does not care:
this checks that our engine finds a published period in data we did not make.
"""

import numpy as np
import pytest
from astropy.timeseries import LombScargle

from phasewise.core.lightcurve import LightCurve
from phasewise.core.periodogram import PeriodogramSettings, compute_periodogram, find_candidates

sunspots = pytest.importorskip("statsmodels.datasets.sunspots")

YEAR = 365.25


@pytest.fixture(scope="module")
def series():
    data = sunspots.load_pandas().data
    t = data["YEAR"].to_numpy(float) * YEAR
    y = data["SUNACTIVITY"].to_numpy(float)
    return LightCurve("sunspots", t, y, time_scale="JD")


def test_schwabe_cycle_recovered(series):
    # yearly sampling: search up to half the sampling frequency
    settings = PeriodogramSettings(fmax=1 / (2 * YEAR), oversampling=10)
    pgram = compute_periodogram(series, settings)
    best = find_candidates(pgram, series, settings)[0]
    period_years = best.period / YEAR
    assert 10.0 < period_years < 12.0  # Hathaway 2015 (from memory): about 11 yr
    assert best.fap < 1e-10


def test_same_peak_as_astropy(series):
    # reference: astropy LombScargle on the same frequencies (floating mean, no errors).
    # Stop short of 0.5 c/yr: at the Nyquist frequency of evenly spaced data every
    # sine term vanishes and the power is ill-conditioned in any implementation.
    settings = PeriodogramSettings(fmax=0.45 / YEAR, oversampling=10)
    ours = compute_periodogram(series, settings)
    theirs = LombScargle(series.time, series.mag).power(ours.frequency, method="slow")
    np.testing.assert_allclose(ours.power, theirs, atol=1e-6)
