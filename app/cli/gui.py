"""Window commands: ``phasewise demo`` and ``phasewise open``.

Qt is imported only inside the command functions, so the rest of the
command line stays free of it.
"""

from __future__ import annotations

import argparse
import os
import sys
from importlib import resources
from pathlib import Path

from phasewise.core.errors import PhasewiseError

__all__ = [
    "register",
    "DEMO_LEDGER",
    "demo_data_dir",
    "user_data_dir",
    "demo_files",
    "ensure_demo_ledger",
    "window_problem",
]

DEMO_LEDGER = "demo.ledger.sqlite"

#: What to install when the window's libraries are missing.
GUI_EXTRA_HINT = (
    "the window needs Qt and pyqtgraph, which this installation does not have; "
    "install them with:  pip install 'phasewise[gui]'  (or pipx/uv with the gui extra)"
)


def demo_data_dir() -> Path:
    """The demo survey shipped inside the package (``phasewise.demo_data``)."""
    return Path(str(resources.files("phasewise.demo_data").joinpath("caldera_survey.ecsv"))).parent


def user_data_dir() -> Path:
    """Where Phasewise keeps files of its own for this user (the demo ledger).

    ``$XDG_DATA_HOME/phasewise`` (default ``~/.local/share/phasewise``) on
    Linux and other Unix, ``~/Library/Application Support/Phasewise`` on
    macOS, ``%LOCALAPPDATA%\\Phasewise`` on Windows.
    """
    if sys.platform == "win32":
        base = os.environ.get("LOCALAPPDATA") or str(Path.home() / "AppData" / "Local")
        return Path(base) / "Phasewise"
    if sys.platform == "darwin":
        return Path.home() / "Library" / "Application Support" / "Phasewise"
    base = os.environ.get("XDG_DATA_HOME") or str(Path.home() / ".local" / "share")
    return Path(base) / "phasewise"


def window_problem(screenshot: bool, environ=None) -> str | None:
    """Why a window cannot open here, in plain words, or None.

    ``--screenshot`` renders offscreen and needs no display.  Otherwise, on
    Linux and other X11/Wayland systems, a display must be named by DISPLAY
    or WAYLAND_DISPLAY, unless QT_QPA_PLATFORM picks a platform explicitly.
    """
    import importlib.util

    environ = os.environ if environ is None else environ
    if importlib.util.find_spec("PySide6") is None or importlib.util.find_spec("pyqtgraph") is None:
        return GUI_EXTRA_HINT
    if screenshot or sys.platform in ("win32", "darwin") or environ.get("QT_QPA_PLATFORM"):
        return None
    if not environ.get("DISPLAY") and not environ.get("WAYLAND_DISPLAY"):
        return (
            "no display to open a window on (DISPLAY and WAYLAND_DISPLAY are not set); "
            "run it on a desktop session, over 'ssh -X', or under a virtual display "
            "('xvfb-run phasewise …'); '--screenshot OUT.png' renders the window "
            "offscreen without a display"
        )
    return None


def _window_options(parser: argparse.ArgumentParser) -> None:
    parser.add_argument(
        "--screenshot",
        metavar="OUT.png",
        help="render the window after loading, save it as PNG and exit (works offscreen)",
    )
    parser.add_argument("--star", metavar="ID", help="star to show first")
    parser.add_argument(
        "--view",
        choices=("desk", "population"),
        default="desk",
        help="view to show (default: desk)",
    )


def register(subparsers) -> None:
    demo = subparsers.add_parser(
        "demo",
        help="open the vetting desk on the demo survey",
        description=(
            "Build (or reuse, when up to date) the demo ledger from the demo survey files "
            "and open the vetting desk on it."
        ),
    )
    demo.add_argument(
        "--data",
        type=Path,
        default=None,
        help="folder of the demo survey (default: the copy shipped with Phasewise)",
    )
    demo.add_argument(
        "--ledger",
        type=Path,
        default=None,
        help=f"demo ledger to build or reuse (default: {DEMO_LEDGER} in the user data folder)",
    )
    demo.add_argument(
        "--rebuild",
        action="store_true",
        help="build a fresh demo ledger (one holding verdicts is kept; the new one goes beside it)",
    )
    _window_options(demo)
    demo.set_defaults(func=run_demo)

    open_ = subparsers.add_parser(
        "open",
        help="open the vetting desk on a ledger or on photometry files",
        description=(
            "Open a ledger (NAME.ledger.sqlite), or import photometry files into a new "
            "ledger (analysing every star) and open that."
        ),
    )
    open_.add_argument("paths", nargs="*", type=Path, metavar="LEDGER | FILE")
    open_.add_argument(
        "--columns", metavar="MAPPING", help="column mapping for files, e.g. 'time=hjd,mag=V'"
    )
    open_.add_argument(
        "--ledger",
        type=Path,
        help="ledger to create from the files (default: FIRST_FILE.ledger.sqlite beside it)",
    )
    _window_options(open_)
    open_.set_defaults(func=run_open)


# ----------------------------------------------------------------- building
def demo_files(folder: Path) -> list[Path]:
    """The demo survey's photometry: its long table (ECSV, else CSV), else its star folder."""
    if not folder.is_dir():
        raise PhasewiseError("the demo survey folder is missing", file=str(folder))
    for pattern in ("*survey*.ecsv", "*survey*.csv"):
        found = sorted(folder.glob(pattern))
        if found:
            return [found[0]]
    if (folder / "stars").is_dir():
        return [folder / "stars"]
    raise PhasewiseError("no demo survey table or stars/ folder found", file=str(folder))


def _up_to_date(ledger_path: Path, files: list[Path], settings) -> bool:
    """The ledger is newer than its sources and was analysed with these settings."""
    if not ledger_path.exists():
        return False
    newest = max(p.stat().st_mtime for p in files)
    if ledger_path.stat().st_mtime < newest:
        return False
    from phasewise.app.desk.services import CoreServices

    try:
        ledger = CoreServices().open_ledger(ledger_path, readonly=True)
    except PhasewiseError:
        return False
    try:
        digest = CoreServices().settings_record(settings)[1]
        return ledger.settings_hash == digest and not ledger.stars_needing_analysis(
            digest, only="stale"
        )
    finally:
        ledger.close()


def _progress(done: int, total: int, message: str = "") -> None:
    if total and (done % 25 == 0 or done == total):
        print(f"\r{done}/{total} {message:40.40}", end="", file=sys.stderr, flush=True)


def _keep_as_is(path: Path) -> bool:
    """A ledger that must not be replaced: it holds verdicts, is in use, or cannot be read."""
    from phasewise.core.ledger import Ledger

    try:
        with Ledger.open(path, readonly=True, check="none") as ledger:
            decided = sum(
                n for status, n in ledger.status_counts().items() if status != "unreviewed"
            )
            return decided > 0 or ledger.lock_holder() is not None
    except PhasewiseError:
        return True


def _upgrade(path: Path) -> None:
    """Migrate a demo ledger an older Phasewise wrote (its verdicts are kept), so
    that it is reused or kept rather than taken for an unreadable file."""
    from phasewise.core.ledger import SCHEMA_VERSION, Ledger

    try:
        if Ledger.schema_version(path) < SCHEMA_VERSION:
            Ledger.open(path).close()
    except PhasewiseError:
        pass  # in use, damaged or read-only: _keep_as_is leaves it as it is


def _demo_ledgers(target: Path) -> list[Path]:
    """``target`` and the fresh demo ledgers built beside it, newest first."""
    stem = target.name.removesuffix(".ledger.sqlite")
    siblings = target.parent.glob(f"{stem}-*.ledger.sqlite")
    found = [p for p in (target, *siblings) if p.exists()]
    return sorted(found, key=lambda p: p.stat().st_mtime, reverse=True)


def _fresh_beside(target: Path) -> Path:
    stem = target.name.removesuffix(".ledger.sqlite")
    n = 2
    while (candidate := target.with_name(f"{stem}-{n}.ledger.sqlite")).exists():
        n += 1
    return candidate


def demo_needs_build(
    folder: Path | None = None, rebuild: bool = False, ledger: Path | None = None
) -> tuple[list[Path], Path, bool]:
    """(survey files, demo ledger path, whether it must be built).

    An up-to-date demo ledger (the default one, or a fresh one built beside
    it) is reused.  A demo ledger is replaced only when it holds no verdict
    and no other process has it open; otherwise a fresh one is built beside
    it and the old one is left as it is.
    """
    from phasewise.app.desk.services import CoreServices

    files = demo_files(folder if folder is not None else demo_data_dir())
    target = ledger if ledger is not None else user_data_dir() / DEMO_LEDGER
    settings = CoreServices().default_settings()
    for path in _demo_ledgers(target):
        _upgrade(path)
    if not rebuild:
        for path in _demo_ledgers(target):
            if _up_to_date(path, files, settings):
                return files, path, False
    if target.exists() and _keep_as_is(target):
        fresh = _fresh_beside(target)
        print(
            f"the demo ledger {target} holds verdicts or is in use; it is kept as it is, "
            f"and a fresh one is built at {fresh}",
            file=sys.stderr,
        )
        return files, fresh, True
    return files, target, True


def _remove_ledger(target: Path) -> None:
    for suffix in ("", "-wal", "-shm"):
        stale = target.with_name(target.name + suffix)
        if stale.exists():
            stale.unlink()


def ensure_demo_ledger(
    folder: Path | None = None, rebuild: bool = False, report=_progress, ledger: Path | None = None
) -> Path:
    """The demo ledger, built from the demo survey when needed (no window)."""
    from phasewise.app.desk.building import build_ledger
    from phasewise.app.desk.services import CoreServices

    files, target, build = demo_needs_build(folder, rebuild, ledger)
    if build:
        services = CoreServices()
        target.parent.mkdir(parents=True, exist_ok=True)
        _remove_ledger(target)  # only ever one without verdicts, not in use (see above)
        print(f"building {target} from {len(files)} file(s)…", file=sys.stderr)
        build_ledger(services, files, None, target, services.default_settings(), report=report)
        print(file=sys.stderr)
    return target


def _target_for(paths, columns, ledger):
    """(mapping, new ledger path) for photometry files given on the command line."""
    mapping = None
    if columns:
        from phasewise.core.io import ColumnMapping

        mapping = ColumnMapping.parse(columns)
    first = Path(paths[0])
    target = ledger or first.with_name(first.name.split(".")[0] + ".ledger.sqlite")
    if target.exists():
        raise PhasewiseError(
            "a ledger of that name exists; open it directly or give --ledger", file=str(target)
        )
    return mapping, target


def _ledger_from_files(paths, mapping, target) -> Path:
    from phasewise.app.desk.building import build_ledger
    from phasewise.app.desk.services import CoreServices

    services = CoreServices()
    print(f"importing {len(paths)} file(s) into {target}…", file=sys.stderr)
    build_ledger(
        services, list(paths), mapping, target, services.default_settings(), report=_progress
    )
    print(file=sys.stderr)
    return target


# ------------------------------------------------------------------ window
def _show(ledger_path: Path | None, args, build=None) -> int:
    """Open the window on a ledger, or build one first inside it (``build``:
    files, mapping, target) with a progress dialog and a Cancel button."""
    import gc
    import tempfile

    from PySide6.QtCore import QCoreApplication, QEvent, QSettings
    from PySide6.QtWidgets import QApplication

    from phasewise.app.desk import MainWindow
    from phasewise.core.threads import limit_blas_threads

    limit_blas_threads()
    app = QApplication.instance() or QApplication(sys.argv[:1])
    app.setApplicationName("Phasewise")
    app.setOrganizationName("Phasewise")
    tmp = None
    settings = None
    if args.screenshot:
        # a fresh layout, so screenshots do not depend on the user's saved one
        tmp = tempfile.TemporaryDirectory()
        settings = QSettings(str(Path(tmp.name) / "layout.ini"), QSettings.Format.IniFormat)
    window = MainWindow(settings=settings)
    try:
        _attach_views(window)
        app.setWindowIcon(window.windowIcon())
        window.show()
        if ledger_path is not None:
            window.open_ledger(ledger_path)
            _select(window, args.star)
        elif build is not None:
            files, mapping, target = build
            window.files.build_ledger(
                files, mapping, target, on_done=lambda _path, w=window: _select(w, args.star)
            )
        window.show_view(args.view)
        if args.screenshot:
            window.wait_idle()
            out = window.save_screenshot(args.screenshot)
            print(f"screenshot written to {out}")
            return 0
        return int(app.exec())
    finally:
        window.close()
        window.deleteLater()
        QCoreApplication.sendPostedEvents(None, QEvent.Type.DeferredDelete)
        app.processEvents()
        del window
        gc.collect()
        if tmp is not None:
            tmp.cleanup()


def _select(window, star_id) -> None:
    if star_id:
        if star_id not in window.star_list.model.star_ids():
            raise PhasewiseError(f"no star {star_id!r} in the ledger", field="--star")
        window.select_star(star_id)


def _attach_views(window) -> None:
    """Let other views (the population view) dock into the window if present."""
    import importlib
    import importlib.util

    if importlib.util.find_spec("phasewise.app.population") is None:
        return
    # present: import it for real, so an error inside it is reported, not hidden
    population = importlib.import_module("phasewise.app.population")
    attach = getattr(population, "attach", None)
    if attach is not None:
        attach(window)


def _prepare_window(args) -> None:
    """Refuse plainly when no window can open here; screenshots always render offscreen."""
    problem = window_problem(bool(args.screenshot))
    if problem:
        raise PhasewiseError(problem)
    if args.screenshot:
        # the program's own choice for this process: a screenshot needs no display
        os.environ["QT_QPA_PLATFORM"] = "offscreen"


def run_demo(args) -> int:
    _prepare_window(args)
    if args.screenshot:
        return _show(ensure_demo_ledger(args.data, args.rebuild, ledger=args.ledger), args)
    files, target, build = demo_needs_build(args.data, args.rebuild, args.ledger)
    if not build:
        return _show(target, args)
    target.parent.mkdir(parents=True, exist_ok=True)
    _remove_ledger(target)  # only ever one without verdicts, not in use
    return _show(None, args, build=(files, None, target))


def run_open(args) -> int:
    _prepare_window(args)
    paths = list(args.paths)
    for p in paths:
        if not p.exists():
            raise PhasewiseError("no such file", file=str(p))
    if not paths:
        return _show(None, args)
    if len(paths) == 1 and paths[0].name.endswith(".sqlite"):
        return _show(paths[0], args)
    if any(p.name.endswith(".sqlite") for p in paths):
        raise PhasewiseError("give one ledger, or photometry files, not both")
    mapping, target = _target_for(paths, args.columns, args.ledger)
    if args.screenshot:
        return _show(_ledger_from_files(paths, mapping, target), args)
    return _show(None, args, build=(paths, mapping, target))
