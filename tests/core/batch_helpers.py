"""Stand-in analysis functions for the batch tests.

Workers import them by name (``tests.core.batch_helpers:quick_analyse``),
as they would any analysis function; they are fast and say exactly what
happened, so the orchestration can be tested apart from the science.
"""

from __future__ import annotations

import os
import time

import numpy as np

#: File each call appends "pid star_id" to, when set (the kill test reads it).
LOG_VARIABLE = "PHASEWISE_TEST_BATCH_LOG"
#: Seconds each call sleeps, when set.
DELAY_VARIABLE = "PHASEWISE_TEST_BATCH_DELAY"


def quick_analyse(lc, settings, *, periodogram=None):
    """A result dict of the shape ``AnalysisResult.to_dict()`` has, made in microseconds."""
    log = os.environ.get(LOG_VARIABLE)
    if log:
        with open(log, "a", encoding="ascii") as handle:
            handle.write(f"{os.getpid()} {lc.star_id}\n")
    delay = float(os.environ.get(DELAY_VARIABLE, "0") or 0)
    if delay:
        time.sleep(delay)
    _, mag, _ = lc.arrays()
    return {
        "star_id": lc.star_id,
        "status": "ok",
        "reason": "",
        "settings_hash": settings.hash,
        "n_points": lc.n_points,
        "n_good": lc.n_good,
        "mean_mag": float(np.mean(mag)),
        "amplitude": float(np.ptp(mag)),
        "shared_periodogram": periodogram is not None,
        "flags": [],
        "suggestions": [],
    }


def raising_analyse(lc, settings, *, periodogram=None):
    """Raises for stars whose id ends in 3 (a bug inside a worker); else as quick_analyse."""
    if lc.star_id.endswith("3"):
        raise RuntimeError(f"injected failure for {lc.star_id}")
    return quick_analyse(lc, settings, periodogram=periodogram)


def failing_status_analyse(lc, settings, *, periodogram=None):
    """A result with status "failed" (bad data, no exception) for ids ending in 5."""
    result = quick_analyse(lc, settings, periodogram=periodogram)
    if lc.star_id.endswith("5"):
        result.update(status="failed", reason="ValueError: the curve has no usable band")
    return result


def dying_analyse(lc, settings, *, periodogram=None):
    """The worker process dies (as on a crash in compiled code) for ids ending in 7."""
    if lc.star_id.endswith("7"):
        os._exit(3)
    return quick_analyse(lc, settings, periodogram=periodogram)


def dividing_analyse(lc, settings, *, periodogram=None):
    """Divides by zero for stars whose id ends in 2 (a failure inside the analysis)."""
    if lc.star_id.endswith("2"):
        return 1 / 0
    return quick_analyse(lc, settings, periodogram=periodogram)
