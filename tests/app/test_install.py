"""Phasewise installs and starts like a Python application (built wheel, fresh environments).

The slow test installs the wheel into a new virtual environment the way a
user would (pip, from the package index), first without the window's extra
(a headless server or cluster worker), then with it, and runs the program
with no display and no Qt variable set.
"""

from __future__ import annotations

import base64
import hashlib
import os
import subprocess
import sys
import zipfile
from pathlib import Path

import pytest

import phasewise

ROOT = Path(__file__).resolve().parents[2]


def _build_wheel(out: Path) -> Path:
    subprocess.run(
        [sys.executable, "-m", "pip", "wheel", "-q", "--no-deps", "-w", str(out), str(ROOT)],
        check=True,
        capture_output=True,
    )
    (wheel,) = out.glob("phasewise-*.whl")
    return wheel


@pytest.fixture(scope="module")
def wheel(tmp_path_factory) -> Path:
    return _build_wheel(tmp_path_factory.mktemp("wheel"))


def _package_folders() -> set[str]:
    """Every Python package of the repository, by its installed name."""
    found = {"phasewise"}
    for top, name in (("core", "phasewise.core"), ("app", "phasewise.app")):
        for init in (ROOT / top).rglob("__init__.py"):
            rel = init.parent.relative_to(ROOT / top)
            found.add(".".join([name, *rel.parts]) if rel.parts else name)
    return found | {"phasewise.icons", "phasewise.demo_data"}


def test_the_suite_runs_against_the_installed_wheel_when_asked():
    # bootstrap.py test sets this: the code under test is the built wheel's, not the source tree
    if os.environ.get("PHASEWISE_EXPECT_INSTALLED") != "1":
        pytest.skip("run by bootstrap.py test, which installs the wheel first")
    import phasewise.core

    installed = Path(phasewise.__file__).resolve().parent
    assert "site-packages" in installed.parts
    assert installed != ROOT / "src" / "phasewise"
    assert Path(phasewise.core.__file__).resolve().parent == installed / "core"


@pytest.mark.slow
def test_the_wheel_holds_one_package_with_its_resources(wheel):
    names = zipfile.ZipFile(wheel).namelist()
    tops = {n.split("/")[0] for n in names}
    assert tops == {"phasewise", wheel.name.split("-py3")[0] + ".dist-info"}
    packages = {n.rsplit("/", 1)[0].replace("/", ".") for n in names if n.endswith("/__init__.py")}
    assert packages == _package_folders()  # pyproject's package list misses none
    for resource in (
        "phasewise/core/classify/rulebook.toml",
        "phasewise/icons/confirm.svg",
        "phasewise/demo_data/caldera_survey.ecsv",
        "phasewise/__main__.py",
    ):
        assert resource in names


def _foreign_core_wheel(folder: Path) -> Path:
    """A wheel of another distribution that ships a top-level package named ``core``."""
    dist = "unrelated_core-1.0.dist-info"
    files = {
        "core/__init__.py": b"VALUE = 'not phasewise'\n",
        f"{dist}/METADATA": b"Metadata-Version: 2.1\nName: unrelated-core\nVersion: 1.0\n",
        f"{dist}/WHEEL": b"Wheel-Version: 1.0\nGenerator: hand\nRoot-Is-Purelib: true\nTag: py3-none-any\n",
    }
    record = []
    for name, data in files.items():
        digest = base64.urlsafe_b64encode(hashlib.sha256(data).digest()).rstrip(b"=").decode()
        record.append(f"{name},sha256={digest},{len(data)}")
    record.append(f"{dist}/RECORD,,")
    path = folder / "unrelated_core-1.0-py3-none-any.whl"
    with zipfile.ZipFile(path, "w") as z:
        for name, data in files.items():
            z.writestr(name, data)
        z.writestr(f"{dist}/RECORD", "\n".join(record) + "\n")
    return path


def _user_env(home: Path) -> dict:
    """A user's environment with no display and no Qt variable."""
    env = {k: v for k, v in os.environ.items() if not k.startswith(("QT_", "DISPLAY", "WAYLAND"))}
    env.pop("PYTHONPATH", None)
    env.pop("PHASEWISE_EXPECT_INSTALLED", None)
    env.update(
        HOME=str(home),
        XDG_CONFIG_HOME=str(home / ".config"),
        XDG_DATA_HOME=str(home / ".local" / "share"),
    )
    return env


@pytest.mark.slow
def test_fresh_installs_headless_then_with_the_window(wheel, tmp_path):
    venv_dir = tmp_path / "venv"
    subprocess.run([sys.executable, "-m", "venv", str(venv_dir)], check=True)
    python = venv_dir / "bin" / "python"
    program = venv_dir / "bin" / "phasewise"
    home = tmp_path / "home"
    home.mkdir()
    env = _user_env(home)

    def pip(*args):
        subprocess.run(
            [str(python), "-m", "pip", "--disable-pip-version-check", "-q", "install", *args],
            check=True,
            env=env,
            capture_output=True,
        )

    def run(*args, timeout=600):
        return subprocess.run(
            [str(program), *args],
            cwd=tmp_path,
            capture_output=True,
            text=True,
            env=env,
            timeout=timeout,
        )

    # 1. headless: core and command line, no Qt
    pip(str(wheel))
    version = run("--version")
    assert (
        version.returncode == 0 and version.stdout.strip() == f"phasewise {phasewise.__version__}"
    )
    module = subprocess.run(
        [str(python), "-m", "phasewise", "--version"], capture_output=True, text=True, env=env
    )
    assert module.stdout == version.stdout
    has_qt = subprocess.run(
        [str(python), "-c", "import importlib.util as u; print(u.find_spec('PySide6') is None)"],
        capture_output=True,
        text=True,
        env=env,
    )
    assert has_qt.stdout.strip() == "True"  # the plain install brought no Qt
    star = ROOT / "demo_data" / "stars" / "CAL-V001.csv"
    inspect = run("inspect", str(star), "--json")
    assert inspect.returncode == 0, inspect.stderr
    assert '"period"' in inspect.stdout
    refused = run("open", str(star))
    assert refused.returncode == 2
    assert "pip install 'phasewise[gui]'" in refused.stderr
    assert "Traceback" not in refused.stderr

    # 2. another distribution's top-level `core` beside it breaks nothing
    pip(str(_foreign_core_wheel(tmp_path)))
    assert run("--version").stdout == version.stdout

    # 3. with the gui extra: the demo renders offscreen with no display and no Qt variable
    pip(f"{wheel}[gui]")
    shot = tmp_path / "desk.png"
    demo = run("demo", "--screenshot", str(shot), "--star", "CAL-V001")
    assert demo.returncode == 0, demo.stderr[-3000:]
    assert shot.stat().st_size > 50_000
    ledger = home / ".local" / "share" / "phasewise" / "demo.ledger.sqlite"
    assert ledger.is_file()  # the user's data folder, not site-packages
    assert not list((venv_dir / "lib").rglob("*.ledger.sqlite"))
    # without --screenshot and without a display, the window command says so plainly
    no_display = run("demo")
    assert no_display.returncode == 2
    assert "no display" in no_display.stderr and "Traceback" not in no_display.stderr
