"""Validation of settings and arrays, in one place and one wording style.

Settings dataclasses call these from ``__post_init__``; readers and the
light-curve constructor call :func:`as_float_array`.  Every failure raises
:class:`~core.errors.SettingsError` (or the error class passed in) naming the
field and what it accepts.
"""

from __future__ import annotations

from collections.abc import Iterable
from typing import Any

import numpy as np

from .errors import PhasewiseError, SettingsError

__all__ = [
    "require_choice",
    "require_positive",
    "require_range",
    "require_int",
    "as_float_array",
    "finite_or_none",
]


def require_choice(field: str, value: Any, choices: Iterable[Any]) -> Any:
    """Return ``value`` if it is one of ``choices``, else raise."""
    choices = tuple(choices)
    if value not in choices:
        options = ", ".join(repr(c) for c in choices)
        raise SettingsError(f"got {value!r}; expected one of {options}", field=field)
    return value


def require_positive(field: str, value: float, *, allow_zero: bool = False) -> float:
    """Return ``value`` if it is a finite number > 0 (or >= 0), else raise."""
    try:
        number = float(value)
    except (TypeError, ValueError):
        raise SettingsError(f"got {value!r}; expected a number", field=field) from None
    ok = number >= 0 if allow_zero else number > 0
    if not np.isfinite(number) or not ok:
        bound = ">= 0" if allow_zero else "> 0"
        raise SettingsError(f"got {value!r}; expected a finite number {bound}", field=field)
    return number


def require_range(field: str, value: float, low: float | None, high: float | None) -> float:
    """Return ``value`` if ``low <= value <= high`` (either bound may be None)."""
    try:
        number = float(value)
    except (TypeError, ValueError):
        raise SettingsError(f"got {value!r}; expected a number", field=field) from None
    if (
        not np.isfinite(number)
        or (low is not None and number < low)
        or (high is not None and number > high)
    ):
        lo = "-inf" if low is None else f"{low:g}"
        hi = "inf" if high is None else f"{high:g}"
        raise SettingsError(f"got {value!r}; expected a number in [{lo}, {hi}]", field=field)
    return number


def require_int(field: str, value: Any, low: int | None = None, high: int | None = None) -> int:
    """Return ``value`` as int if it is a whole number within the bounds."""
    if isinstance(value, bool) or not isinstance(value, (int, np.integer)):
        raise SettingsError(f"got {value!r}; expected a whole number", field=field)
    require_range(field, value, low, high)
    return int(value)


def as_float_array(
    name: str,
    values: Any,
    *,
    length: int | None = None,
    error: type[PhasewiseError] = SettingsError,
) -> np.ndarray:
    """Convert ``values`` to a 1-d float64 array, checking its length.

    NaN and inf are allowed here; cleaning rules deal with them and report.
    """
    try:
        array = np.asarray(values, dtype=np.float64)
    except (TypeError, ValueError) as exc:
        raise error(f"expected numbers ({exc})", field=name) from None
    if array.ndim != 1:
        raise error(f"expected a 1-d array, got shape {array.shape}", field=name)
    if length is not None and array.size != length:
        raise error(f"expected {length} values, got {array.size}", field=name)
    return array


def finite_or_none(value: Any) -> float | None:
    """``value`` as a finite float, or None (missing, non-numeric, NaN or inf).

    Results and features use None for "not measured", so JSON stays strict.
    Strings and booleans are not numbers here.
    """
    if value is None or isinstance(value, (str, bool)):
        return None
    try:
        number = float(value)
    except (TypeError, ValueError):
        return None
    return number if np.isfinite(number) else None
