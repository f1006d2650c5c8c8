"""core/ never loads Qt; the command line loads it only to open a window."""

import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]

PROBE = """
import importlib, pkgutil, sys
from phasewise import core
names = [m.name for m in pkgutil.walk_packages(core.__path__, "phasewise.core.")]
for name in names:
    importlib.import_module(name)
loaded = sorted(m for m in sys.modules if m.split(".")[0] in {"PySide6", "PyQt5", "PyQt6", "pyqtgraph", "shiboken6"})
print(len(names), ",".join(loaded))
"""


def _run(code: str) -> str:
    result = subprocess.run(
        [sys.executable, "-c", code], cwd=ROOT, capture_output=True, text=True, check=True
    )
    return result.stdout.strip()


@pytest.mark.slow  # a few seconds (subprocesses or a worker); run by the slow suite
def test_every_core_module_imports_without_qt():
    count, _, loaded = _run(PROBE).partition(" ")
    assert int(count) >= 3  # the walk really found modules
    assert loaded == ""


def test_command_line_help_loads_no_qt():
    code = (
        "import sys, contextlib, io\n"
        "from phasewise.app.cli import main\n"
        "with contextlib.redirect_stdout(io.StringIO()):\n"
        "    main([])\n"
        "print(','.join(m for m in sys.modules if m.startswith(('PySide6', 'pyqtgraph'))))"
    )
    assert _run(code) == ""
