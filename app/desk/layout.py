"""The desk window's layout: kept between sessions in its QSettings."""

from __future__ import annotations

from PySide6.QtCore import QByteArray

__all__ = ["restore_layout", "save_layout", "default_sizes"]


def restore_layout(window) -> bool:
    """Geometry, docks and splitters as last saved; False if none was saved."""
    settings = window.qsettings
    geometry = settings.value("window/geometry")
    if isinstance(geometry, QByteArray):
        window.restoreGeometry(geometry)
    state = settings.value("window/state")
    if isinstance(state, QByteArray):
        window.restoreState(state)
    for name, splitter in window.splitters.items():
        value = settings.value(f"splitter/{name}")
        if isinstance(value, QByteArray):
            splitter.restoreState(value)
    return isinstance(settings.value("splitter/main"), QByteArray)


def save_layout(window) -> None:
    settings = window.qsettings
    settings.setValue("window/geometry", window.saveGeometry())
    settings.setValue("window/state", window.saveState())
    for name, splitter in window.splitters.items():
        settings.setValue(f"splitter/{name}", splitter.saveState())
    settings.sync()


def default_sizes(window) -> None:
    """First start: the list wide enough for its key columns (tests/app/test_desk_layout.py),
    the sheet a fifth, the plots the rest."""
    splitter = window.main_splitter
    width = max(splitter.width(), window.width() - 8) - 2 * splitter.handleWidth()
    listed = min(max(int(0.28 * width), window.star_list.key_columns_width()), int(0.4 * width))
    sheet = int(0.21 * width)
    short = window.centre_splitter.minimumSizeHint().width() - (width - listed - sheet)
    if short > 0:  # a small screen: the sheet gives up its share first (down to its minimum)
        sheet = max(window.sheet.minimumSizeHint().width(), sheet - short)
    splitter.setSizes([listed, width - listed - sheet, sheet])
    centre = width - listed - sheet
    window.top_splitter.setSizes([centre // 2, centre - centre // 2])
