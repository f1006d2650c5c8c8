"""Stand-ins for core modules not merged yet (tests only, never product code).

``FakeServices`` replaces ``core.analysis`` (astropy's Lomb–Scargle and a
numpy least-squares Fourier fit); periodograms, Fourier fits in the folds,
the ledger and the export are the real core modules.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from astropy.timeseries import LombScargle

from app.desk.services import CoreServices
from core.lightcurve import LightCurve
from core.periodogram import PeriodogramSettings


def make_star(star_id, period, n=300, amp=0.4, bands=("V",), seed=0, baseline=120.0):
    rng = np.random.default_rng(seed)
    t = 2460000.0 + np.sort(rng.uniform(0, baseline, n))
    phase = (t / period) % 1.0
    band = np.array([bands[i % len(bands)] for i in range(n)], dtype=object)
    offset = np.array([0.0 if b == bands[0] else 0.4 for b in band])
    mag = 15.0 + offset - amp * (0.5 * np.sin(2 * np.pi * phase) + 0.15 * np.sin(4 * np.pi * phase))
    mag = mag + rng.normal(0, 0.02, n)
    return LightCurve(star_id, t, mag, np.full(n, 0.02), band=band, time_scale="HJD")


@dataclass
class FakeFit:
    coef: np.ndarray
    frequency: float
    order: int

    def _design(self, t):
        t = np.asarray(t, dtype=float)
        cols = [np.ones_like(t)]
        for k in range(1, self.order + 1):
            cols += [
                np.sin(2 * np.pi * k * self.frequency * t),
                np.cos(2 * np.pi * k * self.frequency * t),
            ]
        return np.column_stack(cols)

    def model(self, t):
        return self._design(t) @ self.coef

    @property
    def epoch_max(self):
        grid = np.linspace(0, 1.0 / self.frequency, 500)
        return float(grid[np.argmin(self.model(grid))])


def fake_fit(t, m, e, frequency, order):
    fit = FakeFit(np.zeros(2 * order + 1), frequency, order)
    design = fit._design(t) / np.asarray(e)[:, None]
    fit.coef = np.linalg.lstsq(design, np.asarray(m) / np.asarray(e), rcond=None)[0]
    return fit


@dataclass(frozen=True)
class FakeSettings:
    periodogram: PeriodogramSettings = field(default_factory=PeriodogramSettings)


class FakeServices(CoreServices):
    def __init__(self):
        self.analyse_calls = 0
        self.exported = []

    def default_settings(self):
        return FakeSettings()

    def analyse(self, lc, settings):
        self.analyse_calls += 1
        t, m, e = lc.arrays(lc.bands[0])
        f = np.linspace(0.05, 6.0, 20000)
        p = LombScargle(t, m, e).power(f)
        order = np.argsort(p)[::-1]
        picks = []
        for i in order:
            if all(abs(f[i] - f[j]) > 0.02 for j in picks):
                picks.append(i)
            if len(picks) == 3:
                break
        best = f[picks[0]]
        fit = fake_fit(t, m, e, best, 3)
        return {
            "star_id": lc.star_id,
            "status": "ok",
            "reason": "",
            "n_points": lc.n_points,
            "n_good": lc.n_good,
            "period": 1 / best,
            "period_err": 1e-5,
            "frequency": best,
            "frequency_err": 1e-5,
            "fap": 1e-10,
            "method": "gls",
            "time_scale": lc.time_scale,
            "bands": list(lc.bands),
            "primary_band": lc.bands[0],
            "epoch_max": fit.epoch_max,
            "candidates": [
                {
                    "frequency": f[i],
                    "period": 1 / f[i],
                    "power": p[i],
                    "fap": 1e-9,
                    "snr": 10.0,
                    "marks": ["alias"] if k else [],
                    "mark_details": {"alias": 1.0027} if k else {},
                }
                for k, i in enumerate(picks)
            ],
            "fourier": {
                "order": 3,
                "form": "sine",
                "R21": 0.3,
                "R21_err": 0.01,
                "phi31": 5.1,
                "phi31_err": 0.05,
                "amplitudes": [0.2, 0.06],
                "amplitudes_err": [0.01, 0.01],
            },
            "mean_mag_by_band": {b: 15.0 for b in lc.bands},
            "amplitude": 0.4,
            "amplitude_by_band": {b: 0.4 for b in lc.bands},
            "suggestions": [
                {
                    "class": "RRab",
                    "score": 0.8,
                    "reasons": ["period in range"],
                    "against": [],
                    "period": 1 / best,
                    "note": "",
                },
                {"class": "RRc", "score": 0.2, "reasons": [], "against": ["R21 high"]},
            ],
            "physics": [
                {
                    "quantity": "[Fe/H]",
                    "value": -1.5,
                    "err": 0.2,
                    "unit": "dex",
                    "relation": "invented test relation",
                    "citation": "nobody 2000",
                    "flags": [],
                }
            ],
            "flags": [],
        }


def real_ledger(path, n_stars=6, n_points=300):
    """A real :class:`core.ledger.Ledger` with invented stars and stand-in results."""
    from core.ledger import Ledger

    services = FakeServices()
    ledger = Ledger.create(path)
    lcs = [
        make_star(f"NV-{i + 1:03d}", 0.45 + 0.07 * i, n=n_points, bands=("V", "I"), seed=i)
        for i in range(n_stars)
    ]
    ledger.add_stars(lcs, source_file="invented.csv")
    ledger.set_analysis_settings({"stand_in": True}, "x")
    ledger.store_results([(lc.star_id, "x", services.analyse(lc, None)) for lc in lcs])
    return ledger
