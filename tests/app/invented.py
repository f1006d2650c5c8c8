"""Invented light curves for the desk's tests (no real star, no real survey)."""

from __future__ import annotations

import numpy as np

from phasewise.core.lightcurve import LightCurve


def make_star(star_id, period, n=300, amp=0.4, bands=("V",), seed=0, baseline=120.0):
    """A sawtooth-ish pulsator with Gaussian noise, alternating bands."""
    rng = np.random.default_rng(seed)
    t = 2460000.0 + np.sort(rng.uniform(0, baseline, n))
    phase = (t / period) % 1.0
    band = np.array([bands[i % len(bands)] for i in range(n)], dtype=object)
    offset = np.array([0.0 if b == bands[0] else 0.4 for b in band])
    mag = 15.0 + offset - amp * (0.5 * np.sin(2 * np.pi * phase) + 0.15 * np.sin(4 * np.pi * phase))
    mag = mag + rng.normal(0, 0.02, n)
    return LightCurve(star_id, t, mag, np.full(n, 0.02), band=band, time_scale="HJD")
