"""bootstrap.py: how it tells a user why the window cannot open."""

from __future__ import annotations

import importlib.util
import shutil
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]


def _bootstrap():
    spec = importlib.util.spec_from_file_location("phasewise_bootstrap", ROOT / "bootstrap.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="X11/Wayland display rules")
def test_no_display_is_said_plainly_with_what_to_do():
    bootstrap = _bootstrap()
    problem = bootstrap.qt_problem(Path(sys.executable), {"PATH": "/usr/bin:/bin"})
    assert "no display" in problem
    assert "--screenshot" in problem and "xvfb-run" in problem


def test_an_explicit_offscreen_platform_is_accepted():
    bootstrap = _bootstrap()
    env = {"PATH": "/usr/bin:/bin", "QT_QPA_PLATFORM": "offscreen"}
    assert bootstrap.qt_problem(Path(sys.executable), env) is None


@pytest.mark.skipif(shutil.which("ldd") is None, reason="needs ldd")
def test_missing_libraries_come_from_the_plugins_own_loader_report(tmp_path):
    # The real xcb plugin, copied away from the Qt libraries its RUNPATH ($ORIGIN)
    # points at: the loader then cannot find them, and ldd says so.
    import PySide6

    plugin = Path(PySide6.__file__).parent / "Qt" / "plugins" / "platforms" / "libqxcb.so"
    if not plugin.exists():
        pytest.skip("this PySide6 has no xcb plugin")
    moved = tmp_path / "libqxcb.so"
    shutil.copy(plugin, moved)
    bootstrap = _bootstrap()
    missing = bootstrap.missing_libraries(moved)
    assert any(name.startswith("libQt6") for name in missing)
    in_place = bootstrap.missing_libraries(plugin)
    assert not [lib for lib in in_place if lib.startswith("libQt6")]  # found beside it
