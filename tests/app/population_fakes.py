"""An invented field, written to a real ledger, for the population view tests.

The field: 30 RRab, 15 RRc (one relabelled RRd, one rejected), 4 RRd and 10
classical Cepheids, with V and I; one RRab ("NX-ODD") injected far from the
RRab locus, and one star without a period.  Each star gets a short stand-in
light curve and a stored result dict with the keys of
``AnalysisResult.to_dict()`` that the population view reads.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np


@dataclass(frozen=True)
class FakeVerdict:
    star_id: str
    status: str = "unreviewed"
    class_code: str | None = None
    period: float | None = None


@dataclass(frozen=True)
class FakeStored:
    star_id: str
    result: dict[str, Any] | None
    failed: bool = False


class FakeLedger:
    """Only ``verdicts()`` and ``result(star_id)``, for quick scripts."""

    def __init__(self, rows):
        self._rows = list(rows)
        self._results = {verdict.star_id: result for verdict, result in self._rows}

    def verdicts(self):
        return [verdict for verdict, _ in self._rows]

    def result(self, star_id):
        result = self._results.get(star_id)
        return None if result is None else FakeStored(star_id, result)


def build_ledger(path, rows=None):
    """A real ``core.ledger.Ledger`` holding the invented field, its results and verdicts."""
    from phasewise.core.ledger import Ledger
    from phasewise.core.lightcurve import LightCurve

    rows = invented_field() if rows is None else rows
    ledger = Ledger.create(path)
    time = np.linspace(0.0, 30.0, 12)
    ledger.add_stars(
        LightCurve(verdict.star_id, time, 17.0 + 0.1 * np.sin(time), np.full(12, 0.02))
        for verdict, _ in rows
    )
    ledger.set_analysis_settings({"stand_in": True}, "stand-in")
    ledger.store_results((verdict.star_id, "stand-in", result) for verdict, result in rows)
    for verdict, _ in rows:
        if verdict.status != "unreviewed":
            ledger.set_verdict(verdict.star_id, verdict.status, class_code=verdict.class_code)
    return ledger


def _result(period, suggested, amp_v, v_mag, v_i, r21, phi31, secondary=None):
    result = {
        "period": period,
        "primary_band": "V",
        "amplitude_by_band": {"V": amp_v, "I": 0.6 * amp_v},
        "mean_mag_by_band": {"V": v_mag, "I": v_mag - v_i},
        "fourier": {"form": "sine", "R21": r21, "phi31": phi31},
        "secondary_periods": [],
        "period_ratio": None,
        "suggestions": [{"class": suggested, "score": 0.8, "reasons": []}],
        "physics": [],
    }
    if secondary:
        result["secondary_periods"] = [{"period": secondary}]
        result["period_ratio"] = min(period, secondary) / max(period, secondary)
    return result


def invented_field(seed: int = 11):
    """Rows of (verdict, result dict) for the invented field of the cluster 'Nyx'."""
    rng = np.random.default_rng(seed)
    rows = []
    for i in range(30):
        p = rng.uniform(0.5, 0.66)
        rows.append(
            (
                FakeVerdict(f"NX-AB{i:02d}"),
                _result(
                    p,
                    "RRab",
                    1.7 - 1.6 * p + rng.normal(0, 0.04),
                    17.1 + rng.normal(0, 0.05),
                    0.6 + rng.normal(0, 0.03),
                    0.47 + rng.normal(0, 0.02),
                    5.0 + rng.normal(0, 0.08),
                ),
            )
        )
    for i in range(15):
        p = rng.uniform(0.28, 0.38)
        status, code = "confirmed", "RRc"
        if i == 0:
            status, code = "relabelled", "RRd"
        elif i == 1:
            status, code = "rejected", None
        rows.append(
            (
                FakeVerdict(f"NX-C{i:02d}", status, code),
                _result(
                    p,
                    "RRc",
                    0.45 + rng.normal(0, 0.03),
                    17.05 + rng.normal(0, 0.05),
                    0.4 + rng.normal(0, 0.03),
                    0.15 + rng.normal(0, 0.02),
                    3.1 + rng.normal(0, 0.1),
                ),
            )
        )
    for i in range(4):
        p1 = rng.uniform(0.35, 0.40)
        rows.append(
            (
                FakeVerdict(f"NX-D{i}"),
                _result(p1, "RRd", 0.5, 17.1, 0.45, 0.2, 3.5, secondary=p1 / 0.745),
            )
        )
    for i in range(10):
        log_p = rng.uniform(0.6, 1.3)
        # V from Benedict et al. 2007 at mu = 16.5 (invented distance, as the RR Lyrae), plus scatter
        v = -4.05 - 2.43 * (log_p - 1) + 16.5 + rng.normal(0, 0.1)
        rows.append(
            (
                FakeVerdict(f"NX-CEP{i}"),
                _result(10**log_p, "DCEP", 0.8, v, 0.55 + 0.25 * log_p, 0.4, 4.8),
            )
        )
    rows.append((FakeVerdict("NX-ODD"), _result(0.58, "RRab", 0.25, 17.1, 0.6, 0.08, 5.0)))
    rows.append((FakeVerdict("NX-NONE"), {"suggestions": [], "period": None}))
    return rows
