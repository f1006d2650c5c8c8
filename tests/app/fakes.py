"""Stand-ins for core modules not merged yet (tests only, never product code).

``FakeLedger`` follows the ledger contract of DEVELOPERS.md in memory;
``FakeServices`` answers the desk's core calls with astropy's Lomb–Scargle
and a numpy least-squares Fourier fit.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from astropy.timeseries import LombScargle

from app.desk.services import CoreServices, PeriodogramView
from core.errors import PhasewiseError
from core.lightcurve import LightCurve


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
class FakePgSettings:
    method: str = "gls"
    fmin: float | None = None
    fmax: float | None = None
    oversampling: int = 5
    nterms: int = 3


@dataclass(frozen=True)
class FakeSettings:
    periodogram: FakePgSettings = field(default_factory=FakePgSettings)


class FakeServices(CoreServices):
    def __init__(self):
        self.analyse_calls = 0
        self.exported = []

    def default_settings(self):
        return FakeSettings()

    def compute_periodogram(self, lc, pg_settings):
        t, m, e = lc.arrays(lc.bands[0])
        f = np.linspace(0.05, 6.0, 20000)
        p = LombScargle(t, m, e).power(f)
        return PeriodogramView(f, p, pg_settings.method, ((0.01, 0.2),))

    def spectral_window(self, time, frequency):
        return LombScargle(time, np.ones_like(time), fit_mean=False, center_data=False).power(
            frequency
        )

    def fit_fourier(self, time, mag, err, frequency, order, form="sine"):
        return fake_fit(time, mag, err, frequency, order)

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
                    "class_code": "RRab",
                    "score": 0.8,
                    "reasons": ["period in range"],
                    "against": [],
                    "period": 1 / best,
                    "note": "",
                },
                {"class_code": "RRc", "score": 0.2, "reasons": [], "against": ["R21 high"]},
            ],
            "physics": [
                {
                    "quantity": "[Fe/H]",
                    "value": -1.5,
                    "error": 0.2,
                    "unit": "dex",
                    "relation": "Invented test relation",
                    "flags": [],
                }
            ],
            "flags": [],
        }


@dataclass(frozen=True)
class Entry:
    star_id: str
    what: str


@dataclass(frozen=True)
class Action:
    label: str
    entries: tuple


@dataclass
class Row:
    star_id: str
    status: str
    suggested_class: str | None
    suggested_score: float | None
    verdict_class: str | None
    period: float | None
    amplitude: float | None
    fap: float | None
    flags: tuple
    stale: bool


@dataclass(frozen=True)
class StoredResult:
    result: dict
    settings_hash: str = "x"
    stale: bool = False


@dataclass(frozen=True)
class Verdict:
    star_id: str
    status: str = "unreviewed"
    class_code: str | None = None
    period: float | None = None
    note: str | None = None


class FakeLedger:
    """In-memory ledger following the contract; ``path`` lets it 'reopen'."""

    store: dict = {}

    def __init__(self, path=None):
        self.path = path
        self.stars, self.results, self.verdicts, self.masks = {}, {}, {}, {}
        self.log, self.undone = [], []
        self.closed = False

    @classmethod
    def create(cls, path):
        ledger = cls(path)
        cls.store[str(path)] = ledger
        return ledger

    @classmethod
    def open(cls, path, readonly=False):
        if str(path) not in cls.store:
            raise PhasewiseError("no such ledger", file=str(path))
        ledger = cls.store[str(path)]
        ledger.closed = False
        return ledger

    def close(self):
        self.closed = True

    def add_stars(self, lightcurves, *, source_file=None):
        n = 0
        for lc in lightcurves:
            self.stars[lc.star_id] = lc
            n += 1
        return n

    def set_analysis_settings(self, settings, settings_hash):
        self.settings = (settings, settings_hash)

    def store_results(self, items):
        for star_id, _hash, result in items:
            self.results[star_id] = result
        return len(items)

    def star_ids(self):
        return list(self.stars)

    def lightcurve(self, star_id):
        lc = self.stars[star_id]
        mask = self.masks.get(star_id)
        return lc if mask is None else lc.with_excluded(mask)

    def set_excluded(self, star_id, mask):
        self.masks[star_id] = np.asarray(mask, dtype=bool).copy()

    def result(self, star_id):
        r = self.results.get(star_id)
        return None if r is None else StoredResult(r)

    def verdict(self, star_id):
        return self.verdicts.get(star_id, Verdict(star_id))

    def set_verdict(self, star_id, status, *, class_code=None, period=None, note=None):
        if status not in ("confirmed", "relabelled", "rejected", "deferred", "unreviewed"):
            raise PhasewiseError(f"unknown status {status!r}", field="status")
        old = self.verdict(star_id)
        new = Verdict(star_id, status, class_code, period, note)
        self.verdicts[star_id] = new
        self.log.append((star_id, old, new))
        self.undone.clear()

    def undo(self):
        if not self.log:
            return None
        star_id, old, new = self.log.pop()
        self.verdicts[star_id] = old
        self.undone.append((star_id, old, new))
        return Action(f"undo verdict on {star_id}", (Entry(star_id, "verdict"),))

    def redo(self):
        if not self.undone:
            return None
        star_id, old, new = self.undone.pop()
        self.verdicts[star_id] = new
        self.log.append((star_id, old, new))
        return Action(f"redo verdict on {star_id}", (Entry(star_id, "verdict"),))

    def undo_label(self):
        return f"verdict on {self.log[-1][0]}" if self.log else None

    def redo_label(self):
        return f"verdict on {self.undone[-1][0]}" if self.undone else None

    def history(self):
        return list(self.log)

    def star_row(self, star_id):
        return next(r for r in self.star_rows() if r.star_id == star_id)

    def star_rows(self):
        rows = []
        for sid in self.stars:
            r = self.results.get(sid) or {}
            v = self.verdict(sid)
            s = (r.get("suggestions") or [{}])[0]
            rows.append(
                Row(
                    sid,
                    v.status,
                    s.get("class_code"),
                    s.get("score"),
                    v.class_code,
                    v.period or r.get("period"),
                    r.get("amplitude"),
                    r.get("fap"),
                    tuple(r.get("flags") or ()),
                    False,
                )
            )
        return rows


def fake_ledger(n_stars=6, n_points=300, path="mem://test"):
    services = FakeServices()
    ledger = FakeLedger.create(path)
    for i in range(n_stars):
        period = 0.45 + 0.07 * i
        lc = make_star(f"NV-{i + 1:03d}", period, n=n_points, bands=("V", "I"), seed=i)
        ledger.add_stars([lc])
        ledger.store_results([(lc.star_id, "x", services.analyse(lc, None))])
    return ledger
