"""Colours and symbols of the classes in the population view.

Colours from the Okabe & Ito colour-blind-safe palette (published open
palette), one symbol per class family so that grey-scale prints still tell
the classes apart.
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["ClassStyle", "class_style", "symbol_glyph"]


@dataclass(frozen=True)
class ClassStyle:
    colour: str  # hex
    symbol: str  # pyqtgraph symbol code
    size: float = 8.0


_STYLES = {
    "RRab": ClassStyle("#0072B2", "o"),
    "RRc": ClassStyle("#D55E00", "t1"),
    "RRd": ClassStyle("#CC79A7", "d"),
    "DCEP": ClassStyle("#009E73", "s"),
    "DCEP(1O)": ClassStyle("#009E73", "t"),
    "T2CEP": ClassStyle("#E69F00", "s"),
    "BL Her": ClassStyle("#E69F00", "t1"),
    "W Vir": ClassStyle("#E69F00", "s"),
    "RV Tau": ClassStyle("#E69F00", "d"),
    "ACEP": ClassStyle("#56B4E9", "p"),
    "DSCT": ClassStyle("#7F3C8D", "h"),
    "HADS": ClassStyle("#7F3C8D", "star"),
    "SXPHE": ClassStyle("#7F3C8D", "t"),
    "EA": ClassStyle("#4D4D4D", "x"),
    "EB": ClassStyle("#4D4D4D", "+"),
    "EW": ClassStyle("#4D4D4D", "d"),
    "LPV": ClassStyle("#8C6D31", "star"),
    "LONG": ClassStyle("#8C6D31", "o", 6.0),  # slow variation, period undetermined
    "CONST": ClassStyle("#B0B0B0", "o", 6.0),
    "UNKNOWN": ClassStyle("#909090", "o", 6.0),
    "REJECTED": ClassStyle("#B8B8B8", "x", 6.0),
}
_SPARE = ("#882255", "#117733", "#332288", "#999933", "#AA4499", "#44AA99")


def class_style(code: str) -> ClassStyle:
    """Style of a class code; unknown codes get a stable spare colour."""
    if code in _STYLES:
        return _STYLES[code]
    family = code.split("(")[0].split()[0] if code else ""
    if family in _STYLES:
        return _STYLES[family]
    return ClassStyle(_SPARE[sum(map(ord, code)) % len(_SPARE)], "o")


_GLYPHS = {
    "o": "●",
    "s": "■",
    "t": "▼",
    "t1": "▲",
    "d": "◆",
    "+": "✚",
    "x": "✖",
    "star": "★",
    "p": "⬟",
    "h": "⬢",
}


def symbol_glyph(symbol: str) -> str:
    """A text glyph that looks like a pyqtgraph symbol, for legends in labels."""
    return _GLYPHS.get(symbol, "●")
