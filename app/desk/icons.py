"""Icons of our own design (SVG files in the repository's ``icons/``).

A source checkout (or an editable install) reads them from ``icons/`` beside
``app/``; a wheel installs them as data files under
``<prefix>/share/phasewise/icons`` (see ``pyproject.toml``).
"""

from __future__ import annotations

import sys
from functools import cache
from pathlib import Path

from PySide6.QtGui import QIcon

__all__ = ["ICON_DIR", "icon", "icon_dir"]


def icon_dir(candidates: tuple[Path, ...] | None = None) -> Path:
    """The first folder of ``candidates`` holding our icons (source tree, then install)."""
    if candidates is None:
        candidates = (
            Path(__file__).resolve().parents[2] / "icons",
            Path(sys.prefix) / "share" / "phasewise" / "icons",
        )
    for folder in candidates:
        if (folder / "confirm.svg").is_file():
            return folder
    return candidates[0]


ICON_DIR = icon_dir()


@cache
def icon(name: str) -> QIcon:
    """The icon ``icons/NAME.svg`` (an empty icon if the file is missing)."""
    path = ICON_DIR / f"{name}.svg"
    return QIcon(str(path)) if path.exists() else QIcon()
