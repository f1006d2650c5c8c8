"""A typed read-model of stored analysis results.

The analysis stores a plain JSON-able dict (``AnalysisResult.to_dict()``,
keys in ``tests/contract.py``).  Everything that reads stored results (the
export, the population diagrams, the classifier's features, the star sheet)
reads them through :class:`StarResult`: one place knows the keys.

``StarResult.from_dict(d).to_dict() == d`` for every stored dict: keys this
model does not know are kept in ``extra`` (per level) and written back, and a
known key is written back only when it was present (or has a value).  Numbers
that are missing or not finite read as None.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, field, fields
from typing import Any

__all__ = [
    "FourierTerms",
    "Suggestion",
    "PhysicsValue",
    "SecondaryPeriod",
    "CandidatePeriod",
    "EclipseTerms",
    "StarResult",
    "number",
]


def number(value: Any) -> float | None:
    """A finite float, or None (missing, text, NaN, infinite)."""
    if type(value) is float:  # the common case, first (the export calls this per cell)
        return value if math.isfinite(value) else None
    if value is None or isinstance(value, bool | str):
        return None
    try:
        out = float(value)
    except (TypeError, ValueError):
        return None
    return out if math.isfinite(out) else None


def _numbers(values: Any) -> tuple[float | None, ...]:
    if not isinstance(values, list | tuple):
        return ()
    return tuple(number(v) for v in values)


class _Record:
    """Shared ``from_dict``/``to_dict`` of the read-model records.

    Each field is copied as stored (so that ``to_dict`` gives back what
    ``from_dict`` read); ``_present`` remembers which keys were there.
    """

    _KEYS: dict[str, str] = {}  # field name -> stored key, where they differ

    @classmethod
    def _key(cls, name: str) -> str:
        return cls._KEYS.get(name, name)

    @classmethod
    def _names(cls) -> tuple[tuple[str, str], ...]:
        """(field name, stored key) pairs, worked out once per class."""
        cached = cls.__dict__.get("_names_cache")
        if cached is None:
            cached = tuple(
                (f.name, cls._key(f.name)) for f in fields(cls) if f.name not in ("extra",)
            )
            cls._names_cache = cached
        return cached

    @classmethod
    def from_dict(cls, data: Mapping[str, Any] | None):
        data = dict(data or {})
        values, present = {}, []
        for name, key in cls._names():
            if key in data:
                values[name] = data.pop(key)
                present.append(key)
        record = cls(**values, extra=data)
        object.__setattr__(record, "_present", tuple(present))
        return record

    def to_dict(self) -> dict[str, Any]:
        out: dict[str, Any] = {}
        present = set(getattr(self, "_present", ()))
        for f in fields(self):
            if f.name in ("extra", "_present"):
                continue
            key = self._key(f.name)
            value = getattr(self, f.name)
            if key in present or value is not None:
                out[key] = value
        out.update(self.extra)
        return out


@dataclass(frozen=True)
class FourierTerms(_Record):
    """A Fourier decomposition as stored (``fourier`` or ``fourier_by_band`` item)."""

    order: Any = None
    form: Any = None
    period: Any = None
    epoch: Any = None
    A0: Any = None
    A0_err: Any = None
    amplitudes: Any = None
    amplitudes_err: Any = None
    phases: Any = None
    phases_err: Any = None
    R21: Any = None
    R21_err: Any = None
    R31: Any = None
    R31_err: Any = None
    phi21: Any = None
    phi21_err: Any = None
    phi31: Any = None
    phi31_err: Any = None
    mean_mag: Any = None
    intensity_mean_mag: Any = None
    peak_to_peak: Any = None
    peak_to_peak_err: Any = None
    epoch_max: Any = None
    epoch_max_err: Any = None
    rise_time: Any = None
    n_points: Any = None
    extra: dict[str, Any] = field(default_factory=dict)

    def amplitude(self, k: int) -> float | None:
        """A_k (k = 1, 2, …) or None."""
        values = _numbers(self.amplitudes)
        return values[k - 1] if len(values) >= k else None

    def amplitude_err(self, k: int) -> float | None:
        values = _numbers(self.amplitudes_err)
        return values[k - 1] if len(values) >= k else None

    def value(self, name: str) -> float | None:
        """A named number (``R21``, ``phi31_err`` …) as a finite float or None."""
        return number(getattr(self, name))

    def sine_phi(self, name: str) -> float | None:
        """``phi21``/``phi31`` in the sine form (converted when stored as cosine:
        phi21(sin) = phi21(cos) − π/2, phi31(sin) = phi31(cos) − π; derivation
        in REFERENCES.md)."""
        value = self.value(name)
        if value is None or self.form != "cosine":
            return value
        shift = {"phi21": -math.pi / 2, "phi31": -math.pi}[name]
        return (value + shift) % (2 * math.pi)


@dataclass(frozen=True)
class Suggestion(_Record):
    """One class suggestion as stored (the class is stored under ``"class"``)."""

    class_code: Any = None
    subtype: Any = None
    score: Any = None
    reasons: Any = None
    against: Any = None
    missing: Any = None
    period: Any = None
    note: Any = None
    extra: dict[str, Any] = field(default_factory=dict)

    _KEYS = {"class_code": "class"}


@dataclass(frozen=True)
class PhysicsValue(_Record):
    """One derived quantity as stored (see ``core.physics.PhysicalValue``)."""

    quantity: Any = None
    relation: Any = None
    value: Any = None
    err: Any = None
    unit: Any = None
    citation: Any = None
    flags: Any = None
    extra: dict[str, Any] = field(default_factory=dict)

    def number(self) -> float | None:
        return number(self.value)

    def error(self) -> float | None:
        return number(self.err)


@dataclass(frozen=True)
class SecondaryPeriod(_Record):
    """A further frequency found by prewhitening, as stored."""

    frequency: Any = None
    period: Any = None
    amplitude: Any = None
    snr: Any = None
    kind: Any = None
    label: Any = None
    extra: dict[str, Any] = field(default_factory=dict)


@dataclass(frozen=True)
class CandidatePeriod(_Record):
    """A periodogram candidate as stored."""

    frequency: Any = None
    period: Any = None
    power: Any = None
    fap: Any = None
    snr: Any = None
    marks: Any = None
    mark_details: Any = None
    extra: dict[str, Any] = field(default_factory=dict)

    @property
    def mark_list(self) -> tuple[str, ...]:
        return tuple(str(m) for m in self.marks or ())

    def alias_period(self) -> float | None:
        """The period the alias mark points to, if the mark details give it."""
        details = self.mark_details
        entry = details.get("alias") if isinstance(details, Mapping) else None
        if isinstance(entry, Mapping):
            for key in ("parent_period", "of_period", "period"):
                if number(entry.get(key)):
                    return number(entry.get(key))
            for key in ("parent_frequency", "of_frequency", "of", "frequency"):
                frequency = number(entry.get(key))
                if frequency:
                    return 1.0 / frequency
        return None


@dataclass(frozen=True)
class EclipseTerms(_Record):
    """The eclipse test's numbers as stored (``core.eclipse.EclipseTest.to_dict``)."""

    depth_primary: Any = None
    depth_secondary: Any = None
    depth_difference: Any = None
    depth_difference_err: Any = None
    asymmetry: Any = None
    odd_harmonic_fraction: Any = None
    unequal_minima: Any = None
    depth_secondary_at_p: Any = None
    extra: dict[str, Any] = field(default_factory=dict)

    def value(self, name: str) -> float | None:
        return number(getattr(self, name))


def _list_of(kind, values: Any) -> Any:
    if not isinstance(values, list | tuple):
        return values
    return tuple(kind.from_dict(v) if isinstance(v, Mapping) else v for v in values)


def _list_to(values: Any) -> Any:
    if not isinstance(values, tuple):
        return values
    return [v.to_dict() if isinstance(v, _Record) else v for v in values]


# Fields of StarResult that hold records, and how they convert.
_NESTED = {
    "fourier": (
        lambda v: FourierTerms.from_dict(v) if isinstance(v, Mapping) else v,
        lambda v: v.to_dict() if isinstance(v, _Record) else v,
    ),
    "fourier_by_band": (
        lambda v: (
            {b: FourierTerms.from_dict(f) for b, f in v.items()} if isinstance(v, Mapping) else v
        ),
        lambda v: (
            {b: f.to_dict() if isinstance(f, _Record) else f for b, f in v.items()}
            if isinstance(v, Mapping)
            else v
        ),
    ),
    "suggestions": (lambda v: _list_of(Suggestion, v), _list_to),
    "physics": (lambda v: _list_of(PhysicsValue, v), _list_to),
    "secondary_periods": (lambda v: _list_of(SecondaryPeriod, v), _list_to),
    "candidates": (lambda v: _list_of(CandidatePeriod, v), _list_to),
    "eclipse": (
        lambda v: EclipseTerms.from_dict(v) if isinstance(v, Mapping) else v,
        lambda v: v.to_dict() if isinstance(v, _Record) else v,
    ),
}


@dataclass(frozen=True)
class StarResult(_Record):
    """The stored analysis result of one star, typed.

    Optional keys added by later analysis versions (``set_aside``,
    ``trend``, ``modulation``, ``relation_band``, ``relation_band_reason``,
    ``final``) are fields of their own; anything else unknown is in ``extra``.
    """

    star_id: Any = None
    status: Any = None
    reason: Any = None
    settings_hash: Any = None
    n_points: Any = None
    n_good: Any = None
    time_scale: Any = None
    bands: Any = None
    primary_band: Any = None
    method: Any = None
    period: Any = None
    period_err: Any = None
    frequency: Any = None
    frequency_err: Any = None
    fap: Any = None
    candidates: Any = None
    fourier: Any = None
    fourier_by_band: Any = None
    mean_mag: Any = None
    mean_mag_by_band: Any = None
    intensity_mean_mag_by_band: Any = None
    amplitude: Any = None
    amplitude_by_band: Any = None
    epoch_max: Any = None
    rise_time: Any = None
    residual_std: Any = None
    secondary_periods: Any = None
    period_ratio: Any = None
    eclipse: Any = None
    features: Any = None
    suggestions: Any = None
    physics: Any = None
    flags: Any = None
    outlier_times: Any = None
    set_aside: Any = None
    trend: Any = None
    modulation: Any = None
    relation_band: Any = None
    relation_band_reason: Any = None
    final: Any = None
    extra: dict[str, Any] = field(default_factory=dict)

    @classmethod
    def from_dict(cls, data: Mapping[str, Any] | None) -> StarResult:
        # nested records are built when first read (most readers need few of them)
        return super().from_dict(data)

    def _typed(self, name: str) -> Any:
        """Field ``name`` as records (see ``_NESTED``), built once and kept."""
        cache = self.__dict__.setdefault("_typed_cache", {})
        if name not in cache:
            cache[name] = _NESTED[name][0](getattr(self, name))
        return cache[name]

    def to_dict(self) -> dict[str, Any]:
        out = super().to_dict()
        for name, (_, write) in _NESTED.items():
            if name in out:
                out[name] = write(out[name])
        return out

    # ------------------------------------------------------------ reading
    @property
    def ok(self) -> bool:
        return self.status == "ok"

    def number(self, name: str) -> float | None:
        """A top-level number (``period``, ``fap`` …) as a finite float or None."""
        return number(getattr(self, name))

    def band_numbers(self, name: str) -> dict[str, float | None]:
        """``mean_mag_by_band`` and the like as ``{band: float or None}``."""
        values = getattr(self, name)
        if not isinstance(values, Mapping):
            return {}
        return {str(b): number(v) for b, v in values.items()}

    @property
    def band_list(self) -> tuple[str, ...]:
        return tuple(str(b) for b in self.bands or ())

    @property
    def primary_fourier(self) -> FourierTerms | None:
        fourier = self._typed("fourier")
        return fourier if isinstance(fourier, FourierTerms) else None

    def band_fourier(self, band: str) -> FourierTerms | None:
        fits = self._typed("fourier_by_band")
        fits = fits if isinstance(fits, Mapping) else {}
        fit = fits.get(band)
        return fit if isinstance(fit, FourierTerms) else None

    @property
    def suggestion_list(self) -> tuple[Suggestion, ...]:
        return tuple(s for s in self._typed("suggestions") or () if isinstance(s, Suggestion))

    @property
    def top(self) -> Suggestion | None:
        """The top suggestion, or None."""
        items = self.suggestion_list
        return items[0] if items else None

    @property
    def physics_list(self) -> tuple[PhysicsValue, ...]:
        return tuple(p for p in self._typed("physics") or () if isinstance(p, PhysicsValue))

    @property
    def secondary_list(self) -> tuple[SecondaryPeriod, ...]:
        items = self._typed("secondary_periods") or ()
        return tuple(s for s in items if isinstance(s, SecondaryPeriod))

    @property
    def flag_list(self) -> tuple[str, ...]:
        return tuple(str(f) for f in self.flags or ())

    def set_aside_indices(self, times: Any = None) -> tuple[int, ...]:
        """Indices of the points the analysis set aside as outliers.

        From ``set_aside`` when stored; else the points whose times are in
        ``outlier_times`` (older results), found in ``times``.
        """
        if isinstance(self.set_aside, list | tuple):
            return tuple(int(i) for i in self.set_aside)
        stored = _numbers(self.outlier_times)
        if not stored or times is None:
            return ()
        import numpy as np

        t = np.asarray(times, dtype=float)
        wanted = np.asarray([s for s in stored if s is not None])
        return tuple(int(i) for i in np.flatnonzero(np.isin(t, wanted)))

    @property
    def candidate_list(self) -> tuple[CandidatePeriod, ...]:
        return tuple(c for c in self._typed("candidates") or () if isinstance(c, CandidatePeriod))

    def chosen_candidate(self) -> CandidatePeriod | None:
        """The candidate at the analysed frequency (else the first), or None."""
        candidates = self.candidate_list
        if not candidates:
            return None
        frequency = self.number("frequency")
        if frequency:
            best = min(candidates, key=lambda c: abs((number(c.frequency) or 0) - frequency))
            if abs((number(best.frequency) or 0) - frequency) <= 1e-6 * frequency + 1e-9:
                return best
        return candidates[0]

    @property
    def eclipse_terms(self) -> EclipseTerms | None:
        eclipse = self._typed("eclipse")
        return eclipse if isinstance(eclipse, EclipseTerms) else None

    @property
    def feature_map(self) -> dict[str, Any]:
        return dict(self.features) if isinstance(self.features, Mapping) else {}
