"""Colours, symbols and text formats shared by the desk's panels.

The band palette is colour-blind safe (distinct in hue and lightness) and
every band also gets its own symbol, so bands stay apart in grey scale too.
"""

from __future__ import annotations

import math

import numpy as np
import pyqtgraph as pg

#: Band colours: blue, orange, bluish green, vermillion, sky blue, reddish purple, yellow, black.
BAND_COLOURS = (
    "#0072B2",
    "#E69F00",
    "#009E73",
    "#D55E00",
    "#56B4E9",
    "#CC79A7",
    "#B8A000",
    "#333333",
)
BAND_SYMBOLS = ("o", "s", "t", "d", "t1", "h", "star", "p")
EXCLUDED_COLOUR = "#9a9a9a"
MODEL_COLOUR = "#D55E00"
MARKER_COLOUR = "#CC0066"
TIME_BINS = 8

STATUS_COLOURS = {
    "unreviewed": "#555555",
    "confirmed": "#007A4D",
    "relabelled": "#0060A8",
    "rejected": "#B03000",
    "deferred": "#8A6D00",
}

PLOT_BACKGROUND = "w"
PLOT_FOREGROUND = "#202020"


def configure_pyqtgraph() -> None:
    pg.setConfigOptions(
        antialias=False, background=PLOT_BACKGROUND, foreground=PLOT_FOREGROUND, useNumba=False
    )


def band_style(index: int) -> tuple[str, str]:
    """(colour, symbol) of the i-th band (bands ordered by point count)."""
    return BAND_COLOURS[index % len(BAND_COLOURS)], BAND_SYMBOLS[index % len(BAND_SYMBOLS)]


def time_colours(n: int = TIME_BINS) -> list:
    """Colours from early (dark purple) to late (yellow) observations."""
    cmap = pg.colormap.get("viridis")
    return [cmap.map(x, mode="qcolor") for x in np.linspace(0.0, 0.92, n)]


def _as_number(value) -> float | str | None:
    """A finite float, the value's own text when it is not a number, or None."""
    if value is None:
        return None
    try:
        v = float(value)
    except (TypeError, ValueError):
        return str(value)
    return v if math.isfinite(v) else None


def fmt(value, digits: int = 4) -> str:
    """A number for display, or an en dash when missing."""
    v = _as_number(value)
    if v is None:
        return "–"
    if isinstance(v, str):
        return v
    if v != 0 and (abs(v) < 1e-3 or abs(v) >= 1e6):
        return f"{v:.{max(digits - 1, 1)}e}"
    return f"{v:.{digits}g}" if abs(v) >= 1 else f"{v:.{digits}f}"


def fmt_pm(value, error=None, digits: int = 4) -> str:
    """``value ± error`` with the value rounded to the error's first two digits."""
    v = _as_number(value)
    if v is None or isinstance(v, str):
        return fmt(value, digits)
    e = _as_number(error)
    if not isinstance(e, float) or e <= 0:
        return fmt(v, digits)
    decimals = max(0, 1 - int(math.floor(math.log10(e))))
    decimals = min(decimals, 10)
    return f"{v:.{decimals}f} ± {e:.{decimals}f}"


def fmt_period(period) -> str:
    if period is None or not math.isfinite(period):
        return "–"
    return f"{period:.7f}" if period < 10 else f"{period:.5f}"
