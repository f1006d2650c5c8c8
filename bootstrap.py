#!/usr/bin/env python3
"""Set up Phasewise in a local virtual environment and run it.

    python3 bootstrap.py demo    # build the demo ledger and open the window on it
    python3 bootstrap.py test    # run the whole test suite
    python3 bootstrap.py run ARGS...   # any phasewise command, e.g. `run --help`

Each call creates ``.venv`` beside this file if needed and (re)installs the
project with its test and Dask extras whenever ``pyproject.toml`` changed.
Only the Python standard library is used here, so a fresh machine with
Python 3.11+ and access to PyPI needs nothing else.
"""

from __future__ import annotations

import hashlib
import os
import subprocess
import sys
import venv
from pathlib import Path

ROOT = Path(__file__).resolve().parent
VENV = ROOT / ".venv"
STAMP = VENV / ".phasewise-install"

# Shared libraries Qt needs at run time, and the Debian package providing each.
QT_SYSTEM_LIBRARIES = {
    "libEGL.so.1": "libegl1",
    "libGL.so.1": "libgl1",
    "libOpenGL.so.0": "libopengl0",
    "libxkbcommon.so.0": "libxkbcommon0",
    "libfontconfig.so.1": "libfontconfig1",
    "libfreetype.so.6": "libfreetype6",
    "libdbus-1.so.3": "libdbus-1-3",
    "libglib-2.0.so.0": "libglib2.0-0",
    "libX11-xcb.so.1": "libx11-xcb1",
    "libxcb-cursor.so.0": "libxcb-cursor0",
    "libxkbcommon-x11.so.0": "libxkbcommon-x11-0",
}


def venv_python() -> Path:
    return VENV / ("Scripts/python.exe" if os.name == "nt" else "bin/python")


def ensure_environment() -> Path:
    if sys.version_info < (3, 11):  # noqa: UP036 - bootstrap may run on an older python3
        sys.exit(f"Phasewise needs Python 3.11 or newer; this is {sys.version.split()[0]}.")
    if not venv_python().exists():
        print(f"bootstrap: creating virtual environment in {VENV}", flush=True)
        venv.EnvBuilder(with_pip=True).create(VENV)
    wanted = hashlib.sha256((ROOT / "pyproject.toml").read_bytes()).hexdigest()
    if not STAMP.exists() or STAMP.read_text().strip() != wanted:
        print("bootstrap: installing Phasewise and its dependencies", flush=True)
        pip = [str(venv_python()), "-m", "pip", "--disable-pip-version-check"]
        subprocess.run([*pip, "install", "-q", "--upgrade", "pip"], check=False)
        subprocess.run([*pip, "install", "-q", "-e", f"{ROOT}[test,dask]"], check=True)
        STAMP.write_text(wanted)
    check_qt()
    return venv_python()


def check_qt() -> None:
    """Say which Debian package to install when Qt cannot load a system library."""
    probe = subprocess.run(
        [str(venv_python()), "-c", "from PySide6 import QtGui, QtWidgets"],
        capture_output=True,
        text=True,
    )
    if probe.returncode == 0:
        return
    missing = [lib for lib in QT_SYSTEM_LIBRARIES if lib in probe.stderr]
    if missing:
        packages = " ".join(sorted({QT_SYSTEM_LIBRARIES[lib] for lib in missing}))
        sys.exit(
            f"bootstrap: Qt cannot load {', '.join(missing)}.\n"
            f"Install the system package(s) with:  sudo apt-get install {packages}"
        )
    sys.exit(f"bootstrap: Qt does not import:\n{probe.stderr.strip()}")


def main(argv: list[str]) -> int:
    if not argv or argv[0] not in {"demo", "test", "run"}:
        print(__doc__)
        return 2
    python = str(ensure_environment())
    env = dict(os.environ)
    command, rest = argv[0], argv[1:]
    if command == "test":
        if not env.get("DISPLAY") and not env.get("WAYLAND_DISPLAY"):
            env.setdefault("QT_QPA_PLATFORM", "offscreen")
        result = subprocess.run([python, "-m", "pytest", *rest], cwd=ROOT, env=env)
        if result.returncode == 5:  # pytest: no tests collected
            print("bootstrap: no tests were collected; that is a failure", file=sys.stderr)
            return 1
        return result.returncode
    if command == "demo":
        return subprocess.run([python, "-m", "app", "demo", *rest], cwd=ROOT, env=env).returncode
    return subprocess.run([python, "-m", "app", *rest], cwd=ROOT, env=env).returncode


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
