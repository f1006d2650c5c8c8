"""The ``phasewise`` command line.

A thin front end: every command parses its arguments, calls ``core`` and
prints.  Each command family lives in its own module of this package and
exposes ``register(subparsers)``; :data:`COMMAND_MODULES` lists them in the
order ``--help`` shows them.  Nothing here imports Qt; the window commands
import it only when they run.
"""

from __future__ import annotations

import argparse
import importlib
import sys

from phasewise import __version__
from phasewise.core.errors import PhasewiseError
from phasewise.core.threads import limit_blas_threads

#: Modules of this package that add commands, in help order.
COMMAND_MODULES: tuple[str, ...] = ("read", "inspect", "ledger", "analyse", "gui")


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="phasewise",
        description=(
            "Phasewise: find periods, classify and vet variable-star light curves. "
            "Class suggestions and distances come from published empirical relations "
            "with known scatter; the astronomer decides."
        ),
    )
    parser.add_argument("--version", action="version", version=f"phasewise {__version__}")
    subparsers = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name in COMMAND_MODULES:
        module = importlib.import_module(f"{__name__}.{name}")
        module.register(subparsers)
    return parser


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "func", None):
        parser.print_help()
        return 0
    limit_blas_threads()  # the program's choice for its own process (see core/threads.py)
    try:
        return int(args.func(args) or 0)
    except PhasewiseError as exc:
        from phasewise.app.cli.terminal import terminal_text

        print(f"phasewise: error: {terminal_text(exc, keep_newlines=True)}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("phasewise: interrupted", file=sys.stderr)
        return 130


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
