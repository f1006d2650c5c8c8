"""Icons of our own design (SVG files in the repository's ``icons/``)."""

from __future__ import annotations

from functools import cache
from pathlib import Path

from PySide6.QtGui import QIcon

__all__ = ["ICON_DIR", "icon"]

ICON_DIR = Path(__file__).resolve().parents[2] / "icons"


@cache
def icon(name: str) -> QIcon:
    """The icon ``icons/NAME.svg`` (an empty icon if the file is missing)."""
    path = ICON_DIR / f"{name}.svg"
    return QIcon(str(path)) if path.exists() else QIcon()
