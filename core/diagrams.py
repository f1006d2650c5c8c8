"""Population diagrams: coordinates of every star in the field's diagnostic planes.

A class is judged not only from one light curve but from where the star falls
among the others.  This module turns per-star numbers (a :class:`StarPoint`
per star, built from an analysis result and the verdict) into the coordinates
of the usual diagrams, the guide lines drawn on them, and a rule that flags
stars far from their class's locus.  Pure numpy; the population view in
``app.population`` only draws what is computed here.

Diagrams (keys of :data:`DIAGRAMS`):

``period_amplitude``
    log10 P [d] against peak-to-peak amplitude [mag] in one band.
``phi31_logp`` / ``r21_logp``
    Fourier planes: phi31 (sine series, rad) and R21 against log10 P.
``period_ratio``
    shorter/longer period against log10 of the longer period (double-mode
    stars), with guide lines at published ratios.
``period_luminosity``
    log10 P against mean magnitude in one band (bright at the top), with a
    period–luminosity relation drawn at a fitted distance modulus.
``colour_magnitude``
    V−I against V (bright at the top), with the instability strip.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterable, Mapping, Sequence
from dataclasses import dataclass, field, replace
from dataclasses import fields as dataclass_fields
from typing import Any

import numpy as np

from . import physics
from .classes import CLASSES
from .errors import PhasewiseError
from .physics.derive import FEATURES_READ
from .results import FourierTerms, StarResult
from .validation import require_int, require_positive

__all__ = [
    "DIAGRAMS",
    "NO_LOCUS_CLASSES",
    "INSTABILITY_STRIP_NOTE",
    "RATIO_GUIDES",
    "RATIO_WINDOW",
    "DOUBLE_MODE_CLASSES",
    "robust_correlation",
    "MIN_CORRELATED",
    "StarPoint",
    "DiagramLine",
    "Diagram",
    "OutlierRule",
    "OutlierFlag",
    "class_used",
    "star_points",
    "result_point_record",
    "final_point_record",
    "star_point",
    "PointTable",
    "point_table",
    "as_table",
    "FEATURE_COLUMNS",
    "available_bands",
    "period_amplitude",
    "phi31_logp",
    "phase_window_start",
    "r21_logp",
    "period_ratio",
    "period_luminosity",
    "colour_magnitude",
    "relation_line",
    "fit_distance_modulus",
    "instability_strip",
    "robust_distance",
    "find_outliers",
    "STANDARD_CANDLES",
    "FieldState",
    "class_counts",
    "summary_members",
    "star_physics",
    "pl_relations",
    "band_extinction",
    "field_state",
    "physics_settings_from",
]

#: Diagram keys and titles, in the order the population view shows them.
DIAGRAMS: dict[str, str] = {
    "period_amplitude": "Period–amplitude",
    "phi31_logp": "Fourier plane φ31",
    "r21_logp": "Fourier plane R21",
    "period_ratio": "Period ratio",
    "period_luminosity": "Period–luminosity",
    "colour_magnitude": "Colour–magnitude",
}

#: Classes that have no locus to be far from: never used for the outlier rule.
NO_LOCUS_CLASSES = frozenset(
    {"UNKNOWN", "REJECTED"} | {c.code for c in CLASSES.values() if not c.periodic}
)

#: Stars between two calls of :func:`star_points`'s ``progress``.
PROGRESS_STEP = 5000

#: Verdict states whose class is the person's, not the machine's.
_DECIDED = frozenset({"confirmed", "relabelled"})


# --------------------------------------------------------------------------- stars
@dataclass(frozen=True)
class StarPoint:
    """The numbers of one star that the population diagrams use.

    Parameters
    ----------
    star_id : str
    class_code : str
        The class used: the verdict class when the person decided, else the
        top suggestion, else ``"UNKNOWN"``; ``"REJECTED"`` for rejected stars.
    class_source : {"verdict", "suggestion", "none"}
    status : str
        Verdict state (``unreviewed``, ``confirmed`` …).
    period : float or None
        Adopted period in days.
    amplitude_by_band, mean_mag_by_band : mapping band -> mag
        Peak-to-peak amplitude and mean magnitude per band.
    R21, phi31 : float or None
        Fourier parameters of the primary band; phi31 in the sine series (rad).
    shorter_period, longer_period : float or None
        The two periods of a double-mode star, in days.
    primary_band : str or None
    features : mapping
        The analysis features (names of ``core.classify.FEATURES``), with the
        verdict's period; ``core.physics.derive`` reads them.
    """

    star_id: str
    class_code: str = "UNKNOWN"
    class_source: str = "none"
    status: str = "unreviewed"
    period: float | None = None
    amplitude_by_band: Mapping[str, float] = field(default_factory=dict)
    mean_mag_by_band: Mapping[str, float] = field(default_factory=dict)
    R21: float | None = None
    phi31: float | None = None
    shorter_period: float | None = None
    longer_period: float | None = None
    primary_band: str | None = None
    features: Mapping[str, Any] = field(default_factory=dict)

    @property
    def ratio(self) -> float | None:
        """Shorter over longer period, or None for a single-period star."""
        if self.shorter_period is None or self.longer_period is None:
            return None
        return self.shorter_period / self.longer_period

    def colour(self, blue: str = "V", red: str = "I") -> float | None:
        """Mean-magnitude colour ``blue − red``, or None when a band is missing."""
        m1, m2 = self.mean_mag_by_band.get(blue), self.mean_mag_by_band.get(red)
        if m1 is None or m2 is None:
            return None
        return float(m1) - float(m2)

    @classmethod
    def from_result(
        cls,
        star_id: str,
        result: Mapping[str, Any] | None,
        *,
        verdict_class: str | None = None,
        status: str = "unreviewed",
        verdict_period: float | None = None,
        final: Mapping[str, Any] | None = None,
    ) -> StarPoint:
        """Build a point from an ``AnalysisResult.to_dict()`` and the verdict.

        The verdict's period, when the person chose one, replaces the analysed
        period; the verdict's final numbers (``final``), when stored, replace
        the analysed ones.  A missing or failed result gives a point with no coordinates
        (it is counted in the summary but drawn in no diagram).
        """
        return cls.from_record(
            star_id,
            result_point_record(result, verdict_period),
            verdict_class=verdict_class,
            status=status,
            final_record=final_point_record(final) if final else None,
        )

    @classmethod
    def from_record(
        cls,
        star_id: str,
        record: Mapping[str, Any],
        *,
        verdict_class: str | None = None,
        status: str = "unreviewed",
        final_record: Mapping[str, Any] | None = None,
        owned: bool = False,
    ) -> StarPoint:
        """Build a point from the records of :func:`result_point_record` and
        :func:`final_point_record` (as the ledger stores them) and the verdict.

        ``owned``: the records were made for this point alone (decoded from
        the ledger), so their mappings are used without a copy.
        """
        top = record.get("top_class")
        code, source = class_used(status, verdict_class, [{"class": top}] if top else ())
        own = _as_is if owned else _copy
        fields = {
            "star_id": str(star_id),
            "class_code": code,
            "class_source": source,
            "status": status,
            "period": record.get("period"),
            "amplitude_by_band": own(record.get("amplitude_by_band")),
            "mean_mag_by_band": own(record.get("mean_mag_by_band")),
            "R21": record.get("R21"),
            "phi31": record.get("phi31"),
            "shorter_period": record.get("shorter_period"),
            "longer_period": record.get("longer_period"),
            "primary_band": record.get("primary_band"),
            "features": own(record.get("features")),
        }
        if final_record is not None:
            _apply_final(fields, final_record, own)
        return cls(**fields)

    def with_final(self, final: Mapping[str, Any]) -> StarPoint:
        """This point with a verdict's final numbers (``core.final``): every
        number then belongs to the verdict's class and period."""
        return self.with_final_record(final_point_record(final))

    def with_final_record(self, record: Mapping[str, Any]) -> StarPoint:
        """This point with the record :func:`final_point_record` made of a verdict's final numbers."""
        fields = {f.name: getattr(self, f.name) for f in dataclass_fields(self)}
        fields["features"] = dict(self.features)
        _apply_final(fields, record, _copy)
        return type(self)(**fields)


def _as_is(mapping: Any) -> dict:
    return {} if mapping is None else mapping


def _copy(mapping: Any) -> dict:
    return dict(mapping or {})


def _apply_final(
    fields: dict[str, Any], record: Mapping[str, Any], own: Callable[[Any], dict]
) -> None:
    """Put a verdict's final numbers (a :func:`final_point_record`) into a point's
    fields, whose ``features`` mapping is the point's own."""
    period = record.get("period")
    if period is None:
        fields.update(period=None, shorter_period=None, longer_period=None)
        return
    amplitudes = own(record.get("amplitude_by_band"))
    means = own(record.get("mean_mag_by_band"))
    features = fields["features"]
    for band, value in amplitudes.items():
        features[f"amplitude_{band}"] = value
    for band, value in means.items():
        features[f"mean_mag_{band}"] = value
    for k, value in enumerate(record.get("A") or (None, None, None), start=1):
        features[f"A{k}"] = value
    features.update(
        period=period,
        period_err=record.get("period_err"),
        log_period=math.log10(period),
        R21=record.get("R21"),
        phi31=record.get("phi31"),
        primary_band=record.get("fourier_band") or fields["primary_band"],
    )
    shorter = longer = None
    if record.get("period2") is not None:
        shorter, longer = sorted((period, record["period2"]))
    fields.update(
        period=period,
        amplitude_by_band=amplitudes,
        mean_mag_by_band=means or fields["mean_mag_by_band"],
        R21=record.get("R21"),
        phi31=record.get("phi31"),
        shorter_period=shorter,
        longer_period=longer,
        features=features,
    )


def result_point_record(
    result: Mapping[str, Any] | StarResult | None, period: float | None = None
) -> dict[str, Any]:
    """What the diagrams use of an analysis result, as plain JSON-ready data.

    ``period`` (the verdict's, when the person chose one) replaces the
    analysed period.  The ledger stores this record (with the analysed
    period) beside each result, so that the population view reads a few
    hundred bytes per star instead of the whole result.
    """
    model = result if isinstance(result, StarResult) else StarResult.from_dict(result)
    top = next((s.class_code for s in model.suggestion_list if s.class_code), None)
    period = _finite(period) or model.number("period")
    fourier = model.primary_fourier
    shorter, longer = _double_mode(period, model)
    amplitudes = _band_map(model.band_numbers("amplitude_by_band"))
    means = _band_map(model.band_numbers("mean_mag_by_band"))
    return {
        "top_class": None if top is None else str(top),
        "period": period,
        "amplitude_by_band": amplitudes,
        "mean_mag_by_band": means,
        "R21": fourier.value("R21") if fourier else None,
        "phi31": fourier.sine_phi("phi31") if fourier else None,
        "shorter_period": shorter,
        "longer_period": longer,
        "primary_band": model.primary_band,
        # only what core.physics.derive reads: a survey's records stay small
        "features": {
            k: v
            for k, v in _features(model, period, amplitudes, means).items()
            if k in FEATURES_READ
        },
    }


def final_point_record(final: Mapping[str, Any]) -> dict[str, Any]:
    """What the diagrams use of a verdict's final numbers (``core.final``), as plain data."""
    from .final import FinalNumbers

    numbers = FinalNumbers.from_dict(final)
    if numbers.period is None:
        return {"period": None}
    terms = FourierTerms.from_dict(numbers.fourier or {})
    return {
        "period": numbers.period,
        "period_err": numbers.period_err,
        "period2": numbers.period2,
        "amplitude_by_band": {
            b: n.amplitude for b, n in numbers.bands.items() if n.amplitude is not None
        },
        "mean_mag_by_band": {
            b: n.mean_mag for b, n in numbers.bands.items() if n.mean_mag is not None
        },
        "A": [terms.amplitude(k) for k in (1, 2, 3)],
        "R21": terms.value("R21"),
        "phi31": terms.sine_phi("phi31"),
        "fourier_band": numbers.fourier_band,
    }


def class_used(
    status: str, verdict_class: str | None, suggestions: Sequence[Mapping[str, Any]] | None
) -> tuple[str, str]:
    """The class a star is drawn as, and where it comes from.

    The person's class wins (``confirmed``/``relabelled``); a rejected star is
    ``"REJECTED"``; otherwise the top suggestion; otherwise ``"UNKNOWN"``.
    """
    if status == "rejected":
        return "REJECTED", "verdict"
    if status in _DECIDED and verdict_class:
        return str(verdict_class), "verdict"
    for suggestion in suggestions or ():
        code = suggestion.get("class") or suggestion.get("class_code")
        if code:
            # a confirmation without a stored class confirms the top suggestion
            return str(code), "verdict" if status == "confirmed" else "suggestion"
    return "UNKNOWN", "none"


def _finite(value: Any) -> float | None:
    try:
        number = float(value)
    except (TypeError, ValueError):
        return None
    return number if math.isfinite(number) else None


def _band_map(values: Mapping[str, Any] | None) -> dict[str, float]:
    out = {}
    for band, value in (values or {}).items():
        number = _finite(value)
        if number is not None:
            out[str(band)] = number
    return out


def _features(
    result: StarResult,
    period: float | None,
    amplitudes: Mapping[str, float],
    means: Mapping[str, float],
) -> dict[str, Any]:
    """The analysis features, filled from the result where the analysis left them out."""
    fourier = result.primary_fourier
    features: dict[str, Any] = {"primary_band": result.primary_band}
    for band, value in amplitudes.items():
        features[f"amplitude_{band}"] = value
    for band, value in means.items():
        features[f"mean_mag_{band}"] = value
    if fourier is not None:
        for k in (1, 2, 3):
            if fourier.amplitude(k) is not None:
                features[f"A{k}"] = fourier.amplitude(k)
        features["R21"] = fourier.value("R21")
        features["phi31"] = fourier.sine_phi("phi31")
    else:
        features["R21"] = features["phi31"] = None
    features["period_err"] = result.number("period_err")
    features.update({k: v for k, v in result.feature_map.items() if v is not None})
    if period is not None:
        # the verdict's period, when the person chose one, is the star's period
        features["period"] = period
        features["log_period"] = math.log10(period) if period > 0 else None
    return features


def _double_mode(period: float | None, result: StarResult) -> tuple[float | None, ...]:
    """Shorter and longer of the primary and the secondary period the ratio refers to.

    Only secondary periods of kind ``independent`` count (``core.prewhiten``).
    """
    if period is None or period <= 0:
        return None, None
    seconds = []
    for entry in result.secondary_list:
        if (entry.kind or "independent") != "independent":
            continue  # harmonics, combinations and side peaks are not a second mode
        number = _finite(entry.period)
        if number is not None and number > 0 and not math.isclose(number, period):
            seconds.append(number)
    if not seconds:
        return None, None
    ratio = result.number("period_ratio")
    if ratio is not None and ratio > 0:
        ratio = min(ratio, 1 / ratio)
        # the secondary period whose ratio with the primary matches the stated one
        second = min(seconds, key=lambda p: abs(min(p, period) / max(p, period) - ratio))
    else:
        second = seconds[0]
    return min(second, period), max(second, period)


def star_points(ledger: Any, progress: Callable[[int, int], Any] | None = None) -> list[StarPoint]:
    """One :class:`StarPoint` per star of a ledger, in the ledger's order.

    The points of :func:`point_table` (``progress`` as there): a Python
    object per star, for scripts and small ledgers; the population view
    keeps the table.
    """
    return point_table(ledger, progress).points()


def star_point(ledger: Any, star_id: str) -> StarPoint:
    """The :class:`StarPoint` of one star of a ledger (after its verdict changed)."""
    return _point(ledger, ledger.verdict(star_id))


def _point(ledger: Any, verdict: Any) -> StarPoint:
    stored = ledger.result(verdict.star_id)
    result = None if stored is None or stored.failed else stored.result
    return StarPoint.from_result(
        verdict.star_id,
        result,
        verdict_class=verdict.class_code,
        status=verdict.status,
        verdict_period=verdict.period,
        final=verdict.final if verdict.status in _DECIDED else None,
    )


# --------------------------------------------------------------------------- columns
#: The numbers of ``core.physics.derive`` the table keeps a column of (the
#: features' primary band is a text column of its own).
FEATURE_COLUMNS = tuple(sorted(FEATURES_READ - {"primary_band"}))

_TEXT_COLUMNS = ("star_ids", "class_code", "class_source", "status", "primary_band", "feature_band")
_NUMBER_COLUMNS = ("period", "R21", "phi31", "shorter_period", "longer_period")
_BAND_COLUMNS = ("amplitude", "mean_mag", "features")


def _number(value: Any) -> float:
    """A stored number as a float, NaN for None (or anything not a number)."""
    if value is None:
        return math.nan
    try:
        return float(value)
    except (TypeError, ValueError):
        return math.nan


def _or_none(value: float) -> float | None:
    return None if math.isnan(value) else float(value)


def _texts(values: Iterable[Any]) -> np.ndarray:
    values = list(values)
    out = np.empty(len(values), dtype=object)
    out[:] = values
    return out


@dataclass(frozen=True, eq=False)
class PointTable:
    """The numbers the population diagrams use of every star, as columns.

    What a list of :class:`StarPoint` holds, with one numpy array per
    quantity (NaN where a number is missing, None where a text is), so that
    a survey's stars are read, drawn and summed up without a Python object
    per star.  ``star_ids``, ``class_code``, ``class_source``, ``status``
    and ``primary_band`` are object arrays of texts; ``amplitude`` and
    ``mean_mag`` map a band to its column; ``features`` maps each name of
    :data:`FEATURE_COLUMNS` to its column and ``feature_band`` is the
    features' primary band (what :func:`core.physics.derive` reads).
    :meth:`point` gives one star's :class:`StarPoint` (tooltips, the dock).
    """

    star_ids: np.ndarray
    class_code: np.ndarray
    class_source: np.ndarray
    status: np.ndarray
    period: np.ndarray
    R21: np.ndarray
    phi31: np.ndarray
    shorter_period: np.ndarray
    longer_period: np.ndarray
    primary_band: np.ndarray
    amplitude: Mapping[str, np.ndarray]
    mean_mag: Mapping[str, np.ndarray]
    features: Mapping[str, np.ndarray]
    feature_band: np.ndarray
    _rows: dict[str, int] = field(default_factory=dict, repr=False)

    def __len__(self) -> int:
        return len(self.star_ids)

    @classmethod
    def from_points(cls, points: Iterable[StarPoint]) -> PointTable:
        """The table of these points (a loop over them: for small lists)."""
        points = list(points)

        def numbers(get: Callable[[StarPoint], Any]) -> np.ndarray:
            return np.array([_number(get(p)) for p in points], dtype=float)

        def bands(name: str) -> dict[str, np.ndarray]:
            keys = sorted({b for p in points for b in getattr(p, name)})
            return {b: numbers(lambda p, b=b: getattr(p, name).get(b)) for b in keys}

        return cls(
            **{
                name: _texts(getattr(p, attr) for p in points)
                for name, attr in (
                    ("star_ids", "star_id"),
                    ("class_code", "class_code"),
                    ("class_source", "class_source"),
                    ("status", "status"),
                    ("primary_band", "primary_band"),
                )
            },
            **{name: numbers(lambda p, n=name: getattr(p, n)) for name in _NUMBER_COLUMNS},
            amplitude=bands("amplitude_by_band"),
            mean_mag=bands("mean_mag_by_band"),
            features={k: numbers(lambda p, k=k: p.features.get(k)) for k in FEATURE_COLUMNS},
            feature_band=_texts(p.features.get("primary_band") for p in points),
        )

    @classmethod
    def concat(cls, tables: Sequence[PointTable]) -> PointTable:
        """The rows of these tables, one after the other."""
        if not tables:
            return cls.from_points(())
        columns: dict[str, Any] = {
            name: np.concatenate([getattr(t, name) for t in tables])
            for name in (*_TEXT_COLUMNS, *_NUMBER_COLUMNS)
        }
        for name in _BAND_COLUMNS:
            keys = sorted(set().union(*(getattr(t, name) for t in tables)))
            columns[name] = {
                k: np.concatenate(
                    [getattr(t, name).get(k, np.full(len(t), np.nan)) for t in tables]
                )
                for k in keys
            }
        return cls(**columns)

    def row_of(self, star_id: str) -> int | None:
        """Row of a star (None when it is not in the table)."""
        if not self._rows and len(self):
            self._rows.update((str(s), k) for k, s in enumerate(self.star_ids))
        return self._rows.get(str(star_id))

    def point(self, row: int) -> StarPoint:
        """The :class:`StarPoint` of one row."""
        k = int(row)

        def band_map(columns: Mapping[str, np.ndarray]) -> dict[str, float]:
            return {b: float(c[k]) for b, c in columns.items() if not math.isnan(c[k])}

        features: dict[str, Any] = band_map(self.features)
        if self.feature_band[k] is not None:
            features["primary_band"] = self.feature_band[k]
        return StarPoint(
            star_id=str(self.star_ids[k]),
            class_code=str(self.class_code[k]),
            class_source=str(self.class_source[k]),
            status=str(self.status[k]),
            period=_or_none(self.period[k]),
            amplitude_by_band=band_map(self.amplitude),
            mean_mag_by_band=band_map(self.mean_mag),
            R21=_or_none(self.R21[k]),
            phi31=_or_none(self.phi31[k]),
            shorter_period=_or_none(self.shorter_period[k]),
            longer_period=_or_none(self.longer_period[k]),
            primary_band=self.primary_band[k],
            features=features,
        )

    def points(self, rows: Iterable[int] | None = None) -> list[StarPoint]:
        """The :class:`StarPoint` of these rows (all by default)."""
        return [self.point(k) for k in (range(len(self)) if rows is None else rows)]

    def with_points(self, points: Iterable[StarPoint]) -> PointTable:
        """This table with the rows of these stars replaced (others are ignored)."""
        points = [p for p in points if self.row_of(p.star_id) is not None]
        if not points:
            return self
        other = PointTable.from_points(points)
        rows = np.array([self.row_of(p.star_id) for p in points], dtype=int)
        columns: dict[str, Any] = {}
        for name in (*_TEXT_COLUMNS, *_NUMBER_COLUMNS):
            column = getattr(self, name).copy()
            column[rows] = getattr(other, name)
            columns[name] = column
        for name in _BAND_COLUMNS:
            mine, theirs = getattr(self, name), getattr(other, name)
            columns[name] = {}
            for key in sorted(set(mine) | set(theirs)):
                column = mine[key].copy() if key in mine else np.full(len(self), np.nan)
                column[rows] = theirs.get(key, np.full(len(rows), np.nan))
                columns[name][key] = column
        return PointTable(**columns, _rows=self._rows)

    def class_counts(self, rows: np.ndarray | None = None) -> dict[str, int]:
        """Number of stars per class used (of the rows given by a mask or indices)."""
        codes = self.class_code if rows is None else self.class_code[rows]
        names, first, counts = np.unique(codes.astype(str), return_index=True, return_counts=True)
        order = np.argsort(first)
        return {str(names[k]): int(counts[k]) for k in order}


def as_table(points: PointTable | Iterable[StarPoint]) -> PointTable:
    """A :class:`PointTable` of the points (the table itself when given one)."""
    return points if isinstance(points, PointTable) else PointTable.from_points(points)


#: Fields of the records (``result_point_record``, ``final_point_record``) read as columns.
_RESULT_NUMBERS = ("period", "R21", "phi31", "shorter_period", "longer_period")
_RESULT_TEXTS = ("$.top_class", "$.primary_band", "$.features.primary_band")
# A2 is none of FEATURE_COLUMNS: the final numbers' A[1] is never read
_FINAL_NUMBERS = ("period", "period_err", "period2", "R21", "phi31", "A[0]", "A[2]")
_FINAL_TEXTS = ("$.fourier_band",)


def point_table(ledger: Any, progress: Callable[[int, int], Any] | None = None) -> PointTable:
    """The :class:`PointTable` of a ledger's stars, in the ledger's order.

    ``progress(done, total)`` is called after each chunk of
    :data:`PROGRESS_STEP` stars and at the end (a view reading a survey in a
    worker thread shows it).

    The ledger picks the numbers out of the small records it keeps beside
    each result and each verdict's final numbers (``Ledger.point_columns``);
    the class used and the final numbers are then applied column by column,
    as :meth:`StarPoint.from_record` does for one star.  A star whose point
    needs more (a period set by the person without final numbers, a record
    missing or not plain JSON) is read in full, as :func:`star_point` does.
    A failed or missing analysis gives a row without coordinates.
    """
    total = ledger.n_stars
    chunks = []
    try:
        for chunk in ledger.point_columns(
            [f"$.{k}" for k in _RESULT_NUMBERS] + [f"$.features.{k}" for k in FEATURE_COLUMNS],
            [f"$.{k}" for k in _FINAL_NUMBERS],
            _RESULT_TEXTS,
            _FINAL_TEXTS,
            band_maps=("amplitude_by_band", "mean_mag_by_band"),
            chunk=PROGRESS_STEP,
        ):
            chunks.append(_chunk_table(ledger, chunk))
            if progress is not None:
                progress(sum(len(t) for t in chunks), total)
    except ValueError:
        # a record the columns cannot hold (a band name no JSON path can name): read in full
        chunks = [PointTable.from_points(star_point(ledger, s) for s in ledger.star_ids())]
        if progress is not None:
            progress(len(chunks[0]), total)
    if progress is not None and not chunks:
        progress(0, total)
    return PointTable.concat(chunks)


def _chunk_table(ledger: Any, chunk: Any) -> PointTable:
    """The rows of one chunk of ``Ledger.point_columns`` (see :func:`point_table`)."""
    bands = chunk.bands
    n_bands = len(bands)
    status = _texts(chunk.status)
    decided = (status == "confirmed") | (status == "relabelled")
    final = decided & chunk.has_final_point
    final_period = chunk.final_numbers[:, 0]
    full = (
        (decided & chunk.has_final & ~chunk.has_final_point)
        | (chunk.analysed & ~chunk.has_result_point)
        | (chunk.analysed & chunk.has_result_point & ~chunk.result_plain)
        | (final & ~chunk.final_plain)
        | (chunk.has_period & ~(final & ~np.isnan(final_period)))
    )
    # an unanalysed star (no result, or a failed one) has no numbers of its own
    numbers = np.where(chunk.analysed[:, None], chunk.result_numbers, np.nan)
    top, band, feature_band = (
        _texts(t if a else None for t, a in zip(texts, chunk.analysed, strict=True))
        for texts in chunk.result_texts
    )
    columns: dict[str, Any] = dict(zip(_RESULT_NUMBERS, numbers.T, strict=False))
    k = len(_RESULT_NUMBERS)
    features = dict(zip(FEATURE_COLUMNS, numbers[:, k : k + len(FEATURE_COLUMNS)].T, strict=True))
    k += len(FEATURE_COLUMNS)
    amplitude = dict(zip(bands, numbers[:, k : k + n_bands].T, strict=True))
    mean_mag = dict(zip(bands, numbers[:, k + n_bands :].T, strict=True))

    # the class used (class_used, column by column)
    verdict_class = _texts(chunk.class_code)
    by_person = decided & _truthy(verdict_class)
    has_top = _truthy(top)
    rejected = status == "rejected"
    columns["class_code"] = np.where(
        rejected, "REJECTED", np.where(by_person, verdict_class, np.where(has_top, top, "UNKNOWN"))
    ).astype(object)
    columns["class_source"] = np.where(
        rejected | by_person | (has_top & (status == "confirmed")),
        "verdict",
        np.where(has_top, "suggestion", "none"),
    ).astype(object)

    # the verdict's final numbers (_apply_final, column by column)
    f = chunk.final_numbers
    no_period = final & np.isnan(final_period)
    with_period = final & ~np.isnan(final_period)
    final_amplitude = f[:, len(_FINAL_NUMBERS) : len(_FINAL_NUMBERS) + n_bands]
    final_means = f[:, len(_FINAL_NUMBERS) + n_bands :]
    new_means = with_period & ~np.all(np.isnan(final_means), axis=1)
    for j, b in enumerate(bands):
        amplitude[b] = np.where(with_period, final_amplitude[:, j], amplitude[b])
        mean_mag[b] = np.where(new_means, final_means[:, j], mean_mag[b])
        if f"mean_mag_{b}" in features:
            given = with_period & ~np.isnan(final_means[:, j])
            features[f"mean_mag_{b}"] = np.where(
                given, final_means[:, j], features[f"mean_mag_{b}"]
            )
    for name, j in (
        ("period", 0),
        ("period_err", 1),
        ("phi31", 4),
        ("A1", 5),
        ("A3", 6),
    ):
        if name in features:
            features[name] = np.where(with_period, f[:, j], features[name])
    fourier_band = _texts(chunk.final_texts[0])
    feature_band = np.where(
        with_period, np.where(_truthy(fourier_band), fourier_band, band), feature_band
    ).astype(object)
    second = f[:, 2]
    columns.update(
        period=np.where(no_period, np.nan, np.where(with_period, final_period, columns["period"])),
        R21=np.where(with_period, f[:, 3], columns["R21"]),
        phi31=np.where(with_period, f[:, 4], columns["phi31"]),
        shorter_period=np.where(
            no_period | with_period, np.fmin(final_period, second), columns["shorter_period"]
        ),
        longer_period=np.where(
            no_period | with_period, np.fmax(final_period, second), columns["longer_period"]
        ),
    )
    single = no_period | (with_period & np.isnan(second))
    columns["shorter_period"] = np.where(single, np.nan, columns["shorter_period"])
    columns["longer_period"] = np.where(single, np.nan, columns["longer_period"])
    table = PointTable(
        star_ids=_texts(chunk.star_ids),
        status=status,
        primary_band=band,
        amplitude=amplitude,
        mean_mag=mean_mag,
        features=features,
        feature_band=feature_band,
        **columns,
    )
    if np.any(full):
        table = table.with_points(
            star_point(ledger, table.star_ids[k]) for k in np.flatnonzero(full)
        )
    return table


def _truthy(texts: np.ndarray) -> np.ndarray:
    """Which texts are neither None nor empty."""
    return np.array([bool(t) for t in texts], dtype=bool)


def available_bands(points: PointTable | Iterable[StarPoint]) -> list[str]:
    """Bands with a mean magnitude, the most common first."""
    table = as_table(points)
    counts = {b: int(np.count_nonzero(~np.isnan(c))) for b, c in table.mean_mag.items()}
    return sorted((b for b in counts if counts[b]), key=lambda b: (-counts[b], b))


# --------------------------------------------------------------------------- diagrams
@dataclass(frozen=True)
class DiagramLine:
    """A guide drawn on a diagram: a relation, a strip edge, a reference ratio."""

    label: str
    x: np.ndarray
    y: np.ndarray
    kind: str = "relation"  # relation | strip | guide
    citation: str = ""


@dataclass(frozen=True)
class Diagram:
    """The coordinates of one diagnostic diagram.

    ``x``, ``y``, ``star_ids`` and ``class_codes`` are parallel; only stars
    with both coordinates finite appear.  ``scale_floor`` is the smallest
    spread per axis the outlier rule accepts (a class whose members coincide
    would otherwise make any neighbour an outlier); ``locus_classes``, when
    set, are the only classes that have a locus in this diagram.
    """

    key: str
    title: str
    x_label: str
    y_label: str
    star_ids: tuple[str, ...]
    class_codes: tuple[str, ...]
    x: np.ndarray
    y: np.ndarray
    invert_y: bool = False
    lines: tuple[DiagramLine, ...] = ()
    note: str = ""
    scale_floor: tuple[float, float] = (1e-3, 1e-3)
    locus_classes: frozenset[str] | None = None  # classes the outlier rule tests (None: all)

    def __len__(self) -> int:
        return len(self.star_ids)

    def counts(self) -> dict[str, int]:
        """Number of points per class."""
        out: dict[str, int] = {}
        for code in self.class_codes:
            out[code] = out.get(code, 0) + 1
        return out

    def inside(self, x_range: tuple[float, float], y_range: tuple[float, float]) -> list[str]:
        """Star ids whose point lies in the rectangle (bounds in any order)."""
        x0, x1 = sorted(x_range)
        y0, y1 = sorted(y_range)
        keep = (self.x >= x0) & (self.x <= x1) & (self.y >= y0) & (self.y <= y1)
        return [self.star_ids[i] for i in np.flatnonzero(keep)]


def _build(key: str, table: PointTable, x: Any, y: Any, keep: Any = True, **kwargs: Any) -> Diagram:
    """The diagram of the stars whose coordinates are both finite (and ``keep``)."""
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    rows = np.flatnonzero(np.isfinite(x) & np.isfinite(y) & keep)
    x, y = x[rows], y[rows]
    x.flags.writeable = False
    y.flags.writeable = False
    return Diagram(
        key=key,
        title=DIAGRAMS[key],
        star_ids=tuple(table.star_ids[rows].tolist()),
        class_codes=tuple(table.class_code[rows].tolist()),
        x=x,
        y=y,
        **kwargs,
    )


def _log_period(period: np.ndarray) -> np.ndarray:
    """log10 of the periods, NaN where a period is missing or not positive."""
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(period > 0, np.log10(np.where(period > 0, period, 1.0)), np.nan)


def _band(columns: Mapping[str, np.ndarray], band: str, n: int) -> np.ndarray:
    return columns.get(band, np.full(n, np.nan))


def period_amplitude(points: PointTable | Iterable[StarPoint], band: str) -> Diagram:
    """log10 P against peak-to-peak amplitude in ``band``."""
    table = as_table(points)
    return _build(
        "period_amplitude",
        table,
        _log_period(table.period),
        _band(table.amplitude, band, len(table)),
        x_label="log₁₀ P [d]",
        y_label=f"peak-to-peak amplitude {band} [mag]",
        note=f"band {band}",
        scale_floor=(0.005, 0.02),
    )


def phase_window_start(phases: Sequence[float]) -> float:
    """Where to cut the phase circle so that no group of phases is split.

    The cut is placed in the middle of the widest empty arc between the
    phases (rounded to 0.1 rad); the phases are then shown in
    ``[start, start + 2π)``.  Zero when there are fewer than two phases.
    """
    values = np.sort(np.mod(np.asarray(phases, dtype=float), 2 * math.pi))
    if len(values) < 2:
        return 0.0
    gaps = np.diff(np.append(values, values[0] + 2 * math.pi))
    k = int(np.argmax(gaps))
    start = (values[k] + gaps[k] / 2) % (2 * math.pi)
    return round(start, 1)


def phi31_logp(points: PointTable | Iterable[StarPoint]) -> Diagram:
    """phi31 (sine series) against log10 P, primary band.

    phi31 is an angle: it is shown in a 2π window cut where no star lies
    (:func:`phase_window_start`), so that a class near 0 ≡ 2π is not split.
    """
    table = as_table(points)
    phi31 = table.phi31
    start = phase_window_start(phi31[~np.isnan(phi31)])
    return _build(
        "phi31_logp",
        table,
        _log_period(table.period),
        start + np.mod(phi31 - start, 2 * math.pi),
        x_label="log₁₀ P [d]",
        y_label="φ31 (sine series) [rad]",
        note=(
            f"primary band of each star; shown in [{start:.1f}, {start + 2 * math.pi:.1f}) rad; "
            "cosine-series values converted (φ31 sin = φ31 cos − π)"
        ),
        scale_floor=(0.005, 0.05),
    )


def r21_logp(points: PointTable | Iterable[StarPoint]) -> Diagram:
    """R21 against log10 P, primary band."""
    table = as_table(points)
    return _build(
        "r21_logp",
        table,
        _log_period(table.period),
        table.R21,
        x_label="log₁₀ P [d]",
        y_label="R21 = A2/A1",
        note="primary band of each star",
        scale_floor=(0.005, 0.01),
    )


#: Reference period ratios drawn on the period-ratio diagram: (label, low, high, citation).
RATIO_GUIDES: tuple[tuple[str, float, float, str], ...] = (
    ("RRd P1O/PF", 0.742, 0.748, "Soszyński et al. 2016, arXiv:1608.00576"),
    ("Cepheid P1O/PF ≈ 0.72", 0.72, 0.72, "Alcock et al. 1995, AJ 109, 1653"),
    ("Cepheid P2O/P1O ≈ 0.80", 0.80, 0.80, "Alcock et al. 1995, AJ 109, 1653"),
)


#: Period ratios drawn on the period-ratio diagram: double-mode pulsators lie
#: between about 0.70 and 0.80 (RRd, Cepheids F/1O and 1O/2O; REFERENCES.md);
#: the window is wider to show near misses (common practice, no source).
RATIO_WINDOW = (0.60, 0.90)

#: Classes with a locus in the period-ratio diagram (the outlier rule tests only these).
DOUBLE_MODE_CLASSES = frozenset({"RRd"})

_NOT_PULSATING = frozenset(
    {"REJECTED", "LPV"} | {c.code for c in CLASSES.values() if not (c.pulsating and c.periodic)}
) - {"UNKNOWN"}


def period_ratio(points: PointTable | Iterable[StarPoint]) -> Diagram:
    """Shorter/longer period against log10 of the longer period (double-mode stars).

    A star is drawn when it has an independent second period whose ratio to
    the first lies in :data:`RATIO_WINDOW`, unless its class used is
    constant, eclipsing, long-period or rejected.
    """
    table = as_table(points)
    low, high = RATIO_WINDOW
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = table.shorter_period / table.longer_period
        log_longer = np.log10(table.longer_period)
    pulsating = ~np.isin(table.class_code, list(_NOT_PULSATING))
    keep = pulsating & (ratio >= low) & (ratio <= high)
    diagram = _build(
        "period_ratio",
        table,
        log_longer,
        ratio,
        keep,
        x_label="log₁₀ P_long [d]",
        y_label="P_short / P_long",
        note=(
            f"stars with an independent second period, ratio {low:g}–{high:g}; "
            "guide lines at published ratios"
        ),
        scale_floor=(0.005, 0.002),
        locus_classes=DOUBLE_MODE_CLASSES,
    )
    if not len(diagram):
        return diagram
    # guides span the stars drawn, so that they (and their labels) stay in view
    x_span = np.array([diagram.x.min(), diagram.x.max()]) + np.array([-0.02, 0.02])
    lines = []
    for label, g_low, g_high, citation in RATIO_GUIDES:
        for value in sorted({g_low, g_high}):
            lines.append(
                DiagramLine(label, x_span, np.full(2, value), kind="guide", citation=citation)
            )
    return replace(diagram, lines=tuple(lines))


def period_luminosity(
    points: PointTable | Iterable[StarPoint], band: str, lines: Sequence[DiagramLine] = ()
) -> Diagram:
    """log10 P against mean magnitude in ``band``; bright at the top."""
    table = as_table(points)
    return _build(
        "period_luminosity",
        table,
        _log_period(table.period),
        _band(table.mean_mag, band, len(table)),
        x_label="log₁₀ P [d]",
        y_label=f"mean {band} [mag]",
        invert_y=True,
        lines=tuple(lines),
        note=f"band {band}",
        scale_floor=(0.005, 0.03),
    )


def colour_magnitude(
    points: PointTable | Iterable[StarPoint],
    blue: str = "V",
    red: str = "I",
    lines: Sequence[DiagramLine] = (),
) -> Diagram:
    """Colour ``blue − red`` against ``blue`` magnitude; bright at the top."""
    table = as_table(points)
    blue_mag = _band(table.mean_mag, blue, len(table))
    return _build(
        "colour_magnitude",
        table,
        blue_mag - _band(table.mean_mag, red, len(table)),
        blue_mag,
        x_label=f"{blue} − {red} [mag]",
        y_label=f"mean {blue} [mag]",
        invert_y=True,
        lines=tuple(lines),
        note=f"mean magnitudes; needs both {blue} and {red}",
        scale_floor=(0.02, 0.03),
    )


# --------------------------------------------------------------------------- guide lines
def relation_line(
    absolute_mag: Callable[[np.ndarray], np.ndarray],
    log_period: tuple[float, float],
    distance_modulus: float,
    extinction: float = 0.0,
    *,
    label: str = "",
    citation: str = "",
    n: int = 50,
) -> DiagramLine:
    """A period–luminosity relation drawn in apparent magnitude.

    ``m(log P) = M(log P) + mu + A``, where ``M`` is the relation's absolute
    magnitude, ``mu`` the (true) distance modulus and ``A`` the extinction in
    the relation's band (definition of the distance modulus, REFERENCES.md).
    """
    lo, hi = sorted(log_period)
    x = np.linspace(lo, hi, n)
    y = np.asarray(absolute_mag(x), dtype=float) + distance_modulus + extinction
    return DiagramLine(label, x, y, kind="relation", citation=citation)


def fit_distance_modulus(
    apparent_mag: Sequence[float],
    absolute_mag: Sequence[float],
    absolute_err: Sequence[float] | float,
    extinction: float = 0.0,
) -> tuple[float, float]:
    """Inverse-variance weighted mean true distance modulus and its error.

    ``mu_i = m_i − M_i − A``; weights ``1/sigma_i**2``; error
    ``1/sqrt(sum w)`` (common practice, no source).  The population view uses
    core.physics for the field summary; this places a relation on a diagram
    when the summary has no value for that class.
    """
    m = np.asarray(apparent_mag, dtype=float)
    big_m = np.asarray(absolute_mag, dtype=float)
    err = np.broadcast_to(np.asarray(absolute_err, dtype=float), m.shape)
    ok = np.isfinite(m) & np.isfinite(big_m) & np.isfinite(err) & (err > 0)
    if not ok.any():
        raise PhasewiseError("no star with a magnitude and a relation value", field="members")
    w = 1.0 / err[ok] ** 2
    mu = m[ok] - big_m[ok] - extinction
    return float(np.sum(w * mu) / np.sum(w)), float(1.0 / np.sqrt(np.sum(w)))


#: How the instability strip is drawn; shown in the UI and docs.
INSTABILITY_STRIP_NOTE = (
    "Instability strip edges: straight-line approximation FROM MEMORY, not a published "
    "calibration: blue edge (V−I)0 = 0.35 − 0.05 (M_V − 0.5), red edge "
    "(V−I)0 = 0.75 − 0.06 (M_V − 0.5), for M_V from −6 to +3. For orientation only."
)

# (V-I)0 at M_V = 0.5 and slope d(V-I)0/dM_V; from memory (see INSTABILITY_STRIP_NOTE)
_STRIP_EDGES = {"blue edge": (0.35, -0.05), "red edge": (0.75, -0.06)}
_STRIP_MV = (-6.0, 3.0)


def instability_strip(
    distance_modulus: float, a_v: float = 0.0, e_v_i: float = 0.0
) -> tuple[DiagramLine, DiagramLine]:
    """Blue and red edges of the instability strip in the (V−I, V) plane.

    The absolute edges (see :data:`INSTABILITY_STRIP_NOTE`, from memory) are
    moved to the field: ``V = M_V + mu + A_V`` and ``V−I = (V−I)0 + E(V−I)``.
    """
    mv = np.linspace(*_STRIP_MV, 10)
    lines = []
    for colour_at_hb, slope in _STRIP_EDGES.values():
        colour0 = colour_at_hb + slope * (mv - 0.5)
        lines.append(
            DiagramLine(
                "instability strip (from memory)",
                colour0 + e_v_i,
                mv + distance_modulus + a_v,
                kind="strip",
                citation="from memory",
            )
        )
    return lines[0], lines[1]


# --------------------------------------------------------------------------- outliers
@dataclass(frozen=True)
class OutlierRule:
    """Flag stars far from their class's locus.

    In each diagram, for each class with at least ``min_members`` points
    (UNKNOWN, CONST and rejected stars excluded; in the period-ratio diagram
    only double-mode classes), each axis is standardised by the class median
    and ``1.4826 × MAD`` (at least the diagram's ``scale_floor``), and the
    distance is the robust Mahalanobis-like
    ``d² = (zx² − 2 r zx zy + zy²) / (1 − r²)`` with the robust correlation
    ``r`` of :func:`robust_correlation`; ``d > threshold`` flags the star.
    For normal scatter, ``d > 4`` happens to one star in about 3000
    (``exp(−d²/2)``, two degrees of freedom).
    """

    threshold: float = 4.0
    min_members: int = 8

    def __post_init__(self) -> None:
        require_positive("outlier threshold", self.threshold)
        require_int("outlier min_members", self.min_members, 3)

    def describe(self) -> str:
        """The rule in plain words, for the UI."""
        return (
            f"Outlier rule: in each diagram, per class with ≥ {self.min_members} stars, "
            "each axis is standardised by the class median and s = 1.4826 × MAD; the "
            "distance is d² = (zx² − 2r·zx·zy + zy²)/(1 − r²), with r the robust "
            "(Gnanadesikan–Kettenring) correlation of the class (taken as 0 below "
            f"{MIN_CORRELATED} stars or |r| < 2/√n), so stars along a sloping sequence are "
            f"not flagged; flagged when d > {self.threshold:g}. UNKNOWN, CONST "
            "and rejected stars are not tested; in the period-ratio diagram only RRd."
        )


@dataclass(frozen=True)
class OutlierFlag:
    """One star far from its class's locus in one diagram."""

    star_id: str
    class_code: str
    diagram: str
    distance: float
    threshold: float

    def reason(self) -> str:
        title = DIAGRAMS.get(self.diagram, self.diagram)
        return (
            f"{self.distance:.1f} robust σ from the {self.class_code} locus in the "
            f"{title} diagram (limit {self.threshold:g})"
        )

    def to_dict(self) -> dict[str, Any]:
        return {
            "star_id": self.star_id,
            "class": self.class_code,
            "diagram": self.diagram,
            "distance": self.distance,
            "threshold": self.threshold,
            "reason": self.reason(),
        }


def _robust_scale(values: np.ndarray, floor: float) -> tuple[float, float]:
    centre = float(np.median(values))
    # 1.4826 makes the MAD a consistent estimate of a normal sigma (common practice, no source)
    spread = max(1.4826 * float(np.median(np.abs(values - centre))), floor, 1e-300)
    return centre, spread


#: Fewer members than this and the outlier distance ignores correlation.
MIN_CORRELATED = 20


def robust_correlation(zx: np.ndarray, zy: np.ndarray) -> float:
    """Correlation of standardised coordinates from robust spreads of their sum and difference.

    ``r = (s_u² − s_v²) / (s_u² + s_v²)`` with ``u = zx + zy``, ``v = zx − zy``
    and ``s`` = 1.4826 × MAD (Gnanadesikan & Kettenring 1972, Biometrics 28,
    81; identity from memory).  Clipped to ±0.99 so that a perfectly thin
    sequence does not make the distance across it infinite.
    """
    _, su = _robust_scale(zx + zy, 0.0)
    _, sv = _robust_scale(zx - zy, 0.0)
    total = su**2 + sv**2
    if not (math.isfinite(total) and total > 0):
        return 0.0  # coinciding points: no correlation to speak of
    return float(np.clip((su**2 - sv**2) / total, -0.99, 0.99))


def robust_distance(
    x: np.ndarray,
    y: np.ndarray,
    scale_floor: tuple[float, float] = (0.0, 0.0),
    *,
    correlated: bool = True,
) -> np.ndarray:
    """Robust Mahalanobis-like distance of each point from the median of the points.

    Each axis is standardised by its median and 1.4826 × MAD (at least
    ``scale_floor``): ``z = (v − median) / s``.  With ``correlated`` the
    distance is ``d² = (zx² − 2 r zx zy + zy²) / (1 − r²)``, ``r`` from
    :func:`robust_correlation`, so that stars along a class's sloping
    sequence (φ31 rising with period, the Bailey diagram) are not flagged.
    ``r`` is taken as 0 for fewer than :data:`MIN_CORRELATED` points or when
    ``|r| < 2/√n``; without ``correlated``, ``d² = zx² + zy²``.
    """
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    cx, sx = _robust_scale(x, scale_floor[0])
    cy, sy = _robust_scale(y, scale_floor[1])
    zx, zy = (x - cx) / sx, (y - cy) / sy
    r = 0.0
    if correlated and len(x) >= MIN_CORRELATED:
        r = robust_correlation(zx, zy)
        # a correlation under two standard errors (1/sqrt(n)) is taken as none
        # (common practice, no source): small classes would get spurious ones
        if abs(r) < 2 / math.sqrt(len(x)):
            r = 0.0
    return np.sqrt((zx**2 - 2 * r * zx * zy + zy**2) / (1 - r**2))


def find_outliers(
    diagrams: Iterable[Diagram], rule: OutlierRule = OutlierRule()
) -> tuple[OutlierFlag, ...]:
    """Stars beyond ``rule.threshold`` from their class's locus, per diagram.

    Sorted by star id, then largest distance first.
    """
    flags = []
    for diagram in diagrams:
        # one sort per diagram, then classes as integers (no comparison per star and class)
        names, inverse = np.unique(np.asarray(diagram.class_codes, dtype=str), return_inverse=True)
        tested = set(names.tolist()) - NO_LOCUS_CLASSES
        if diagram.locus_classes is not None:
            tested &= set(diagram.locus_classes)
        for code in sorted(tested):
            members = np.flatnonzero(inverse == int(np.searchsorted(names, code)))
            if len(members) < rule.min_members:
                continue
            d = robust_distance(diagram.x[members], diagram.y[members], diagram.scale_floor)
            far = d > rule.threshold
            for index, distance in zip(members[far], d[far], strict=True):
                flags.append(
                    OutlierFlag(
                        diagram.star_ids[index], code, diagram.key, float(distance), rule.threshold
                    )
                )
    flags.sort(key=lambda f: (f.star_id, -f.distance))
    return tuple(flags)


# --------------------------------------------------------------------------- field state
#: Classes whose members give a distance modulus in the field summary.
STANDARD_CANDLES = tuple(code for code, c in CLASSES.items() if c.relations)

#: Relations that can be drawn on the period–luminosity diagram.
_PL_KERNELS = frozenset({"pl", "pl_fundamental", "pl_plain"})


@dataclass(frozen=True)
class FieldState:
    """What the population view shows beside and over the diagrams.

    ``summary`` is the :class:`core.physics.PopulationSummary` of the stars
    (rejected, UNKNOWN and CONST stars left out); ``relations`` names, per
    class, the relation behind the first distance modulus of its members.
    ``pl_lines`` and ``strip_lines`` are the guide lines placed at the
    field's distance modulus, with notes saying how.
    """

    ebv: float
    a_v: float
    e_v_i: float
    counts: dict[str, int]
    summary: Any
    relations: dict[str, str]
    strip_modulus: tuple[str, float] | None = None
    pl_lines: tuple[DiagramLine, ...] = ()
    pl_note: str = ""
    strip_lines: tuple[DiagramLine, ...] = ()
    strip_note: str = ""

    def to_dict(self) -> dict[str, Any]:
        return {
            "ebv": self.ebv,
            "a_v": self.a_v,
            "e_v_i": self.e_v_i,
            "counts": dict(self.counts),
            "summary": self.summary.to_dict(),
            "relations": dict(self.relations),
            "pl_note": self.pl_note,
            "strip_note": self.strip_note,
        }


def class_counts(points: PointTable | Iterable[StarPoint]) -> dict[str, int]:
    """Number of stars per class used, in the order the classes first appear."""
    return as_table(points).class_counts()


def summary_members(points: PointTable | Iterable[StarPoint]) -> list[StarPoint]:
    """The stars the field summary uses: all but rejected, UNKNOWN and CONST."""
    if isinstance(points, PointTable):
        codes = points.class_code
        return points.points(np.flatnonzero(~np.isin(codes, list(NO_LOCUS_CLASSES))))
    return [p for p in points if p.class_code not in NO_LOCUS_CLASSES]


def star_physics(points: Iterable[StarPoint], settings: Any = None) -> list[Any]:
    """``core.physics.StarPhysics`` of each star, derived for its class used.

    Values are derived again (``core.physics.derive``) rather than read from
    the stored result, because the person's class, period or the assumed
    extinction may differ from those of the analysis.
    """
    settings = settings or physics.PhysicsSettings()
    out = []
    for point in points:
        values = ()
        if point.class_code in STANDARD_CANDLES:
            values = physics.derive(point.class_code, point.features, settings)
        out.append(physics.StarPhysics(point.star_id, point.class_code, point.period, values))
    return out


def _table_physics(table: PointTable, rows: np.ndarray, settings: Any) -> list[Any]:
    """:func:`star_physics` of these rows of a table, without a :class:`StarPoint` each."""
    features = {name: column[rows].tolist() for name, column in table.features.items()}
    bands = table.feature_band[rows].tolist()
    candle = np.isin(table.class_code[rows], list(STANDARD_CANDLES)).tolist()
    ids, codes = table.star_ids[rows].tolist(), table.class_code[rows].tolist()
    periods = [None if math.isnan(p) else p for p in table.period[rows].tolist()]
    out = []
    for k, code in enumerate(codes):
        values = ()
        if candle[k]:
            # the features of PointTable.point: NaN is a feature not given
            given = {name: column[k] for name, column in features.items() if column[k] == column[k]}
            if bands[k] is not None:
                given["primary_band"] = bands[k]
            values = physics.derive(code, given, settings)
        out.append(physics.StarPhysics(str(ids[k]), code, periods[k], values))
    return out


def pl_relations(band: str, *, with_classes: bool = False) -> list[tuple]:
    """``(name, label)`` of the period–luminosity relations calibrated in ``band``.

    With ``with_classes``, ``(name, label, applies_to)``.
    """
    out = []
    for relation in physics.RELATIONS.values():
        if relation.kernel in _PL_KERNELS and relation.band == band:
            classes = "/".join(relation.applies_to)
            label = f"{classes}: {relation.citation.split(' (')[0]}"
            out.append(
                (relation.name, label, relation.applies_to)
                if with_classes
                else (relation.name, label)
            )
    return out


def band_extinction(band: str, a_v: float, rv: float = 3.1) -> float | None:
    """A_band from A_V with the CCM89 curve (V and I only; None for other bands)."""
    if band == "V":
        return a_v
    if band == "I":
        return a_v * physics.extinction_ratio_i(rv)
    return None


def field_state(
    points: PointTable | Sequence[StarPoint],
    *,
    ebv: float = 0.0,
    pl_band: str = "V",
    pl_relation: str | None = None,
    blue: str = "V",
    red: str = "I",
    physics_settings: Mapping[str, Any] | None = None,
) -> FieldState:
    """Field summary and guide lines for the population view.

    ``physics_settings`` are the ``PhysicsSettings`` fields the analysis used
    (e.g. ``rv``, ``rr_mv_relation``; from the ledger's analysis settings);
    ``ebv`` replaces theirs.

    The summary is :func:`core.physics.population_summary` of
    :func:`star_physics` of :func:`summary_members`, with the extinction
    ``A_V = 3.1 E(B−V)`` (Cardelli, Clayton & Mathis 1989).  The
    period–luminosity relation is drawn at the distance modulus fitted to the
    members of its classes in the diagram (:func:`fit_distance_modulus`, the
    relation's scatter as each star's error); the instability strip at the
    summary's distance of the class with most members used (RRab first).
    """
    settings = physics_settings_from(physics_settings, ebv)
    if isinstance(points, PointTable):
        rows = np.flatnonzero(~np.isin(points.class_code, list(NO_LOCUS_CLASSES)))
        stars = _table_physics(points, rows, settings)
        # the P–L guide needs only the stars of its relation's classes as points
        pl_classes = list(physics.RELATIONS[pl_relation].applies_to) if pl_relation else []
        members = points.points(rows[np.isin(points.class_code[rows], pl_classes)])
    else:
        members = summary_members(points)
        stars = star_physics(members, settings)
    summary = physics.population_summary(stars)
    relations: dict[str, str] = {}
    for star in stars:
        for value in star.values:
            if value.quantity == "mu0" and value.value is not None:
                relations.setdefault(star.class_code, value.relation)
                break
    a_v = float(physics.RELATIONS["ccm89_av"].evaluate({"ebv": ebv, "rv": settings.rv}))
    e_v_i = a_v - a_v * physics.extinction_ratio_i(settings.rv)
    pl_lines, pl_note = _pl_guides(members, pl_band, pl_relation, a_v, settings.rv)
    strip_lines, strip_note, strip_modulus = _strip_guides(summary, blue, red, a_v, e_v_i)
    return FieldState(
        ebv=float(ebv),
        a_v=a_v,
        e_v_i=e_v_i,
        counts=class_counts(points),
        summary=summary,
        relations=relations,
        strip_modulus=strip_modulus,
        pl_lines=pl_lines,
        pl_note=pl_note,
        strip_lines=strip_lines,
        strip_note=strip_note,
    )


def physics_settings_from(values: Mapping[str, Any] | None, ebv: float) -> Any:
    """``core.physics.PhysicsSettings`` from stored values (unknown keys ignored), at ``ebv``."""
    known = {f.name for f in dataclass_fields(physics.PhysicsSettings)}
    given = {k: v for k, v in (values or {}).items() if k in known and k != "ebv"}
    return physics.PhysicsSettings(**given, ebv=float(ebv))


def _pl_guides(
    members: Sequence[StarPoint], band: str, name: str | None, a_v: float, rv: float
) -> tuple[tuple[DiagramLine, ...], str]:
    if not name:
        return (), ""
    relation = physics.RELATIONS[name]
    extinction = band_extinction(band, a_v, rv)
    if extinction is None:
        return (), f"P–L relation {name}: no extinction known for band {band}; not drawn"
    low, high = next(iter(relation.valid.values()))

    def absolute(period: float) -> float:
        return relation.evaluate({"period": period, "period_fundamental": period})

    used = [
        p
        for p in members
        if p.class_code in relation.applies_to
        and p.class_code != "DCEP(1O)"  # drawn as the fundamental-mode line
        and p.period is not None
        and low <= p.period <= high
        and p.mean_mag_by_band.get(band) is not None
    ]
    if not used:
        return (), (
            f"P–L relation {name}: no {'/'.join(relation.applies_to)} star with a {band} mean "
            f"magnitude inside its period range {low:g}–{high:g} d; not drawn"
        )
    scatter = relation.scatter or 0.1
    mu, mu_err = fit_distance_modulus(
        [p.mean_mag_by_band[band] for p in used],
        [absolute(p.period) for p in used],
        scatter,
        extinction,
    )
    line = relation_line(
        lambda log_p: np.array([absolute(10.0**x) for x in np.atleast_1d(log_p)]),
        (math.log10(low), math.log10(high)),
        mu,
        extinction,
        label=f"{relation.formula.split(',')[0]}, μ0 = {mu:.2f}",
        citation=relation.citation,
    )
    note = (
        f"P–L line: {relation.citation} ({relation.formula}), drawn at μ0 = {mu:.3f} ± "
        f"{mu_err:.3f} fitted to {len(used)} {'/'.join(relation.applies_to)} stars with "
        f"A_{band} = {extinction:.3f} mag (weighted mean, relation scatter "
        f"{scatter:g} mag per star)."
    )
    return (line,), note


def _strip_guides(
    summary: Any, blue: str, red: str, a_v: float, e_v_i: float
) -> tuple[tuple[DiagramLine, ...], str, tuple[str, float] | None]:
    if (blue, red) != ("V", "I"):
        return (), "Instability strip: drawn only in the V−I, V plane.", None
    rows = sorted(
        summary.distances, key=lambda d: (d.class_code != "RRab", -d.n_used, d.class_code)
    )
    if not rows:
        return (), "Instability strip: no distance modulus in the field summary; not drawn.", None
    chosen = rows[0]
    lines = instability_strip(chosen.mu0, a_v, e_v_i)
    note = (
        f"{INSTABILITY_STRIP_NOTE} Placed at μ0 = {chosen.mu0:.3f} ({chosen.class_code}), "
        f"A_V = {a_v:.3f}, E(V−I) = {e_v_i:.3f} mag."
    )
    return lines, note, (chosen.class_code, chosen.mu0)
