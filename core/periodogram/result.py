"""The result of a period search."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from ..settings import settings_to_dict
from .settings import PeriodogramSettings

__all__ = ["Periodogram"]


@dataclass(frozen=True, eq=False)
class Periodogram:
    """Power against frequency for one star (larger power = better for every method).

    Attributes
    ----------
    frequency, power : ndarray
        Cycles/day and power (read-only).
    method : str
        ``settings.method``.
    settings : PeriodogramSettings
    n_points : int
        Points used.
    baseline : float
        Time span of those points, days.
    bands : tuple of str
        Bands combined (one unless multi-band).
    statistic : ndarray or None
        Raw statistic of PDM (theta, smaller is better) or CE (entropy H,
        smaller is better); None for least-squares methods.
    statistic_name : str or None
    kernel : str
        Registry name of the kernel that computed it.
    """

    frequency: np.ndarray
    power: np.ndarray
    method: str
    settings: PeriodogramSettings
    n_points: int
    baseline: float
    bands: tuple[str, ...] = ()
    statistic: np.ndarray | None = None
    statistic_name: str | None = None
    kernel: str = ""

    def __post_init__(self) -> None:
        for name in ("frequency", "power", "statistic"):
            array = getattr(self, name)
            if isinstance(array, np.ndarray) and array.flags.writeable:
                array.flags.writeable = False

    @property
    def best_index(self) -> int:
        return int(np.argmax(self.power))

    @property
    def best_frequency(self) -> float:
        """Grid frequency of the highest power, c/d."""
        return float(self.frequency[self.best_index])

    @property
    def best_power(self) -> float:
        return float(self.power[self.best_index])

    @property
    def period(self) -> float:
        """Period of the highest power, days."""
        return 1.0 / self.best_frequency

    @property
    def n_frequencies(self) -> int:
        return int(self.frequency.size)

    @property
    def frequency_step(self) -> float:
        return float(self.frequency[1] - self.frequency[0]) if self.frequency.size > 1 else 0.0

    def to_dict(self, include_arrays: bool = False) -> dict[str, Any]:
        """JSON-able summary; the big arrays only with ``include_arrays=True``."""
        out: dict[str, Any] = {
            "method": self.method,
            "kernel": self.kernel,
            "n_points": self.n_points,
            "baseline": self.baseline,
            "bands": list(self.bands),
            "n_frequencies": self.n_frequencies,
            "fmin": float(self.frequency[0]),
            "fmax": float(self.frequency[-1]),
            "frequency_step": self.frequency_step,
            "best_frequency": self.best_frequency,
            "best_period": self.period,
            "best_power": self.best_power,
            "statistic_name": self.statistic_name,
            "settings": settings_to_dict(self.settings),
        }
        if include_arrays:
            out["frequency"] = self.frequency.tolist()
            out["power"] = self.power.tolist()
            out["statistic"] = None if self.statistic is None else self.statistic.tolist()
        return out
