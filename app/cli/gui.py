"""Window commands: ``phasewise demo`` and ``phasewise open``.

Qt is imported only inside the command functions, so the rest of the
command line stays free of it.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from core.errors import PhasewiseError

__all__ = ["register", "DEMO_DIR", "DEMO_LEDGER", "demo_files", "ensure_demo_ledger"]

DEMO_DIR = Path(__file__).resolve().parents[2] / "demo_data"
DEMO_LEDGER = "demo.ledger.sqlite"


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
    demo.add_argument("--data", type=Path, default=DEMO_DIR, help="folder of the demo survey")
    demo.add_argument("--rebuild", action="store_true", help="rebuild the demo ledger")
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
    from app.desk.services import CoreServices

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


def demo_needs_build(folder: Path, rebuild: bool = False) -> tuple[list[Path], Path, bool]:
    """(survey files, demo ledger path, whether it must be (re)built)."""
    from app.desk.services import CoreServices

    files = demo_files(folder)
    target = folder / DEMO_LEDGER
    settings = CoreServices().default_settings()
    return files, target, rebuild or not _up_to_date(target, files, settings)


def _remove_ledger(target: Path) -> None:
    for suffix in ("", "-wal", "-shm"):
        stale = target.with_name(target.name + suffix)
        if stale.exists():
            stale.unlink()


def ensure_demo_ledger(folder: Path, rebuild: bool = False, report=_progress) -> Path:
    """The demo ledger in ``folder``, built from its survey files when needed (no window)."""
    from app.desk.building import build_ledger
    from app.desk.services import CoreServices

    files, target, build = demo_needs_build(folder, rebuild)
    if build:
        services = CoreServices()
        _remove_ledger(target)
        print(f"building {target} from {len(files)} file(s)…", file=sys.stderr)
        build_ledger(services, files, None, target, services.default_settings(), report=report)
        print(file=sys.stderr)
    return target


def _target_for(paths, columns, ledger):
    """(mapping, new ledger path) for photometry files given on the command line."""
    mapping = None
    if columns:
        from core.io import ColumnMapping

        mapping = ColumnMapping.parse(columns)
    first = Path(paths[0])
    target = ledger or first.with_name(first.name.split(".")[0] + ".ledger.sqlite")
    if target.exists():
        raise PhasewiseError(
            "a ledger of that name exists; open it directly or give --ledger", file=str(target)
        )
    return mapping, target


def _ledger_from_files(paths, mapping, target) -> Path:
    from app.desk.building import build_ledger
    from app.desk.services import CoreServices

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

    from app.desk import MainWindow

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
            window.build_ledger(
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

    if importlib.util.find_spec("app.population") is None:
        return
    # present: import it for real, so an error inside it is reported, not hidden
    population = importlib.import_module("app.population")
    attach = getattr(population, "attach", None)
    if attach is not None:
        attach(window)


def run_demo(args) -> int:
    if args.screenshot:
        return _show(ensure_demo_ledger(Path(args.data), rebuild=args.rebuild), args)
    files, target, build = demo_needs_build(Path(args.data), args.rebuild)
    if not build:
        return _show(target, args)
    _remove_ledger(target)
    return _show(None, args, build=(files, None, target))


def run_open(args) -> int:
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
