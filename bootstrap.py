#!/usr/bin/env python3
"""Set up Phasewise in a local virtual environment and run it.

    python3 bootstrap.py demo          # install with the window, open it on the demo survey
    python3 bootstrap.py test          # install with the test tools, run the quick test suite
    python3 bootstrap.py test --slow   # the tests marked slow, and the benchmark smoke runs
    python3 bootstrap.py run ARGS...   # any phasewise command, e.g. `run --help`

Each call creates ``.venv`` beside this file if needed, builds a wheel of the
project and installs it (not the source tree) with the extras the command
needs: ``gui`` for ``demo`` and ``run``, ``gui,test,dask`` for ``test``.
Dependencies are installed again only when ``pyproject.toml`` or the extras
change.  Only the Python standard library is used here, so a fresh machine
with Python 3.11+ and access to PyPI needs nothing else.
"""

from __future__ import annotations

import glob
import hashlib
import os
import re
import shutil
import subprocess
import sys
import tempfile
import venv
from pathlib import Path

ROOT = Path(__file__).resolve().parent
VENV = ROOT / ".venv"
STAMP = VENV / ".phasewise-install"

EXTRAS = {"demo": ("gui",), "run": ("gui",), "test": ("gui", "test", "dask")}

# Shared libraries Qt's platform plugins load, and the Debian package of each.
QT_SYSTEM_LIBRARIES = {
    "libEGL.so.1": "libegl1",
    "libGL.so.1": "libgl1",
    "libOpenGL.so.0": "libopengl0",
    "libxkbcommon.so.0": "libxkbcommon0",
    "libxkbcommon-x11.so.0": "libxkbcommon-x11-0",
    "libfontconfig.so.1": "libfontconfig1",
    "libfreetype.so.6": "libfreetype6",
    "libdbus-1.so.3": "libdbus-1-3",
    "libglib-2.0.so.0": "libglib2.0-0",
    "libX11.so.6": "libx11-6",
    "libX11-xcb.so.1": "libx11-xcb1",
    "libxcb.so.1": "libxcb1",
    "libxcb-cursor.so.0": "libxcb-cursor0",
    "libxcb-icccm.so.4": "libxcb-icccm4",
    "libxcb-image.so.0": "libxcb-image0",
    "libxcb-keysyms.so.1": "libxcb-keysyms1",
    "libxcb-randr.so.0": "libxcb-randr0",
    "libxcb-render-util.so.0": "libxcb-render-util0",
    "libxcb-render.so.0": "libxcb-render0",
    "libxcb-shape.so.0": "libxcb-shape0",
    "libxcb-shm.so.0": "libxcb-shm0",
    "libxcb-sync.so.1": "libxcb-sync1",
    "libxcb-xfixes.so.0": "libxcb-xfixes0",
    "libxcb-xinerama.so.0": "libxcb-xinerama0",
    "libxcb-xkb.so.1": "libxcb-xkb1",
    "libSM.so.6": "libsm6",
    "libICE.so.6": "libice6",
    "libwayland-client.so.0": "libwayland-client0",
    "libwayland-cursor.so.0": "libwayland-cursor0",
}


def venv_python() -> Path:
    return VENV / ("Scripts/python.exe" if os.name == "nt" else "bin/python")


def _pip() -> list[str]:
    return [str(venv_python()), "-m", "pip", "--disable-pip-version-check"]


def build_wheel() -> Path:
    """A wheel of the source tree, built by the environment's own pip."""
    out = Path(tempfile.mkdtemp(prefix="phasewise-wheel-"))
    subprocess.run([*_pip(), "wheel", "-q", "--no-deps", "-w", str(out), str(ROOT)], check=True)
    wheels = glob.glob(str(out / "phasewise-*.whl"))
    if len(wheels) != 1:
        sys.exit(f"bootstrap: building the wheel gave {wheels!r}")
    return Path(wheels[0])


def ensure_environment(extras: tuple[str, ...]) -> Path:
    """``.venv`` with the wheel of this tree installed, and the dependencies of ``extras``."""
    if sys.version_info < (3, 11):  # noqa: UP036 - bootstrap may run on an older python3
        sys.exit(f"Phasewise needs Python 3.11 or newer; this is {sys.version.split()[0]}.")
    if not venv_python().exists():
        print(f"bootstrap: creating virtual environment in {VENV}", flush=True)
        venv.EnvBuilder(with_pip=True).create(VENV)
    project = (ROOT / "pyproject.toml").read_bytes()
    wanted = hashlib.sha256(project + ",".join(extras).encode()).hexdigest()
    installed = STAMP.read_text().split() if STAMP.exists() else []
    wheel = None
    if wanted not in installed:
        print(f"bootstrap: installing Phasewise's dependencies ({', '.join(extras)})", flush=True)
        subprocess.run([*_pip(), "install", "-q", "--upgrade", "pip"], check=False)
        wheel = build_wheel()
        subprocess.run([*_pip(), "install", "-q", f"{wheel}[{','.join(extras)}]"], check=True)
        STAMP.write_text("\n".join([*installed, wanted]))
    # the project itself: always this tree's code, as a wheel (never the source folders)
    wheel = wheel or build_wheel()
    subprocess.run(
        [*_pip(), "install", "-q", "--no-deps", "--force-reinstall", str(wheel)], check=True
    )
    shutil.rmtree(wheel.parent, ignore_errors=True)
    return venv_python()


def _platform_plugin(python: Path, platform: str) -> Path | None:
    code = (
        "import PySide6, pathlib;"
        f"p = pathlib.Path(PySide6.__file__).parent / 'Qt' / 'plugins' / 'platforms' / 'libq{platform}.so';"
        "print(p if p.exists() else '')"
    )
    out = subprocess.run([str(python), "-c", code], capture_output=True, text=True).stdout.strip()
    return Path(out) if out else None


def missing_libraries(plugin: Path) -> list[str]:
    """Shared libraries the platform plugin (or a library it needs) cannot find, from ldd."""
    if shutil.which("ldd") is None:
        return []
    out = subprocess.run(["ldd", str(plugin)], capture_output=True, text=True).stdout
    return sorted(set(re.findall(r"^\s*(\S+) => not found", out, flags=re.M)))


def qt_problem(python: Path, env: dict) -> str | None:
    """Why the window cannot open here, naming what to do; None if it can.

    The check starts a real ``QGuiApplication`` with the platform plugin the
    window will use, so it fails where the window would, and reads the
    plugin's own missing libraries with ``ldd`` to name Debian packages.
    """
    platform = env.get("QT_QPA_PLATFORM", "").split(":")[0]
    if not platform and sys.platform.startswith("linux"):
        if not env.get("DISPLAY") and not env.get("WAYLAND_DISPLAY"):
            return (
                "there is no display (DISPLAY and WAYLAND_DISPLAY are not set). Run this on a "
                "desktop session or over 'ssh -X', or start a virtual display first "
                "('xvfb-run python3 bootstrap.py demo'). To render the window to a file without "
                "a display: python3 bootstrap.py demo --screenshot desk.png"
            )
        platform = "wayland" if env.get("WAYLAND_DISPLAY") and not env.get("DISPLAY") else "xcb"
    probe = subprocess.run(
        [str(python), "-c", "from PySide6.QtGui import QGuiApplication; QGuiApplication([])"],
        capture_output=True,
        text=True,
        env=env,
    )
    if probe.returncode == 0:
        return None
    missing = []
    plugin = _platform_plugin(python, platform) if platform else None
    if plugin is not None:
        missing = missing_libraries(plugin)
    missing += [lib for lib in QT_SYSTEM_LIBRARIES if lib in probe.stderr and lib not in missing]
    if missing:
        packages = sorted(
            {QT_SYSTEM_LIBRARIES.get(lib, f"(the package providing {lib})") for lib in missing}
        )
        return (
            f"Qt's '{platform}' platform plugin cannot load {', '.join(missing)}.\n"
            f"Install the system package(s) with:  sudo apt-get install {' '.join(packages)}"
        )
    last = probe.stderr.strip().splitlines()[-6:]
    return "Qt cannot start its platform plugin:\n" + "\n".join(last)


def main(argv: list[str]) -> int:
    if not argv or argv[0] not in EXTRAS:
        print(__doc__)
        return 2
    command, rest = argv[0], argv[1:]
    python = str(ensure_environment(EXTRAS[command]))
    env = dict(os.environ)
    if command == "test":
        env.setdefault("QT_QPA_PLATFORM", "offscreen")
        env["PHASEWISE_EXPECT_INSTALLED"] = "1"  # tests check they run the installed wheel
        if rest[:1] == ["--slow"]:
            rest = ["-m", "slow", *rest[1:]]
        elif not any(arg == "-m" or arg.startswith("-m") for arg in rest):
            rest = ["-m", "not slow", *rest]
        # -P: the current folder is not put on sys.path, so the installed wheel is what runs
        result = subprocess.run([python, "-P", "-m", "pytest", *rest], cwd=ROOT, env=env)
        if result.returncode == 5:  # pytest: no tests collected
            print("bootstrap: no tests were collected; that is a failure", file=sys.stderr)
            return 1
        return result.returncode
    if command == "demo" and "--screenshot" not in rest:
        problem = qt_problem(Path(python), env)
        if problem:
            print(f"bootstrap: the window cannot open: {problem}", file=sys.stderr)
            return 1
    args = ["demo", *rest] if command == "demo" else rest
    return subprocess.run([python, "-m", "phasewise", *args], cwd=ROOT, env=env).returncode


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
