"""Icons of our own design (SVG files in the repository's ``icons/``).

They ship inside the package as ``phasewise.icons`` and are read with
:mod:`importlib.resources`, from a source checkout and from a wheel alike.
"""

from __future__ import annotations

from functools import cache
from importlib import resources
from pathlib import Path

from PySide6.QtGui import QIcon

__all__ = ["ICON_DIR", "icon", "icon_dir"]


def icon_dir() -> Path:
    """The folder of the ``phasewise.icons`` resources."""
    return Path(str(resources.files("phasewise.icons").joinpath("confirm.svg"))).parent


ICON_DIR = icon_dir()


@cache
def icon(name: str) -> QIcon:
    """The icon ``icons/NAME.svg`` (an empty icon if the file is missing)."""
    path = ICON_DIR / f"{name}.svg"
    return QIcon(str(path)) if path.exists() else QIcon()
