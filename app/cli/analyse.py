"""``phasewise analyse``: analyse the stars of a ledger on every core or a Dask cluster.

``phasewise analyse LEDGER`` analyses the stars that need it;
``phasewise analyse FILE... --ledger NEW.ledger.sqlite`` imports photometry
into a new ledger first.  Progress goes to stderr (a bar on a terminal,
plain lines otherwise); the summary goes to stdout.
"""

from __future__ import annotations

import argparse
import json
import sys
import time
from pathlib import Path

from phasewise.app.cli.terminal import terminal_text
from phasewise.core.batch import ONLY_CHOICES, BatchSummary, Progress

#: Seconds between plain progress lines when stderr is not a terminal.
PLAIN_EVERY = 5.0
#: Failure reasons listed in the summary (all are stored in the ledger).
SHOWN_FAILURES = 10


def register(subparsers) -> None:
    parser = subparsers.add_parser(
        "analyse",
        help="analyse the stars of a ledger (all cores, or a Dask cluster)",
        description=(
            "Analyse the stars of a ledger and store the results in it.  Give one LEDGER, "
            "or photometry FILEs with --ledger NEW to import them first.  A stopped or "
            "killed run keeps what it wrote; run again to do the rest."
        ),
    )
    parser.add_argument("paths", nargs="+", metavar="LEDGER|FILE", type=Path)
    parser.add_argument(
        "--ledger",
        type=Path,
        metavar="NEW.ledger.sqlite",
        help="import the FILEs into this new ledger, then analyse it",
    )
    parser.add_argument(
        "--columns",
        metavar="ROLE=NAME,...",
        help="choose columns when importing, e.g. time=hjd,mag=V,err=eV,band=filter",
    )
    parser.add_argument(
        "--workers",
        type=int,
        metavar="N",
        help="worker processes (default: all cores; 0: run in this process)",
    )
    parser.add_argument(
        "--scheduler",
        metavar="tcp://HOST:PORT",
        help="run on the Dask cluster of this scheduler (needs phasewise[dask]). Light "
        "curves, settings and results travel to and from the scheduler and workers as "
        "pickles, which can run code when loaded: use only machines you trust. On a shared "
        "network use tls://HOST:PORT with distributed's TLS settings (CA file, certificate "
        "and key under distributed.comm.tls in the dask configuration)",
    )
    parser.add_argument("--settings", type=Path, metavar="FILE", help="analysis settings (TOML)")
    parser.add_argument(
        "--only",
        choices=ONLY_CHOICES,
        default="unanalysed",
        help="stars without a result (default), those and stale ones, or all",
    )
    parser.add_argument(
        "--chunk-size", type=int, metavar="N", help="stars sent to a worker at once"
    )
    parser.add_argument(
        "--shared-epochs",
        action="store_true",
        help="batch the periodograms of single-band stars observed at the same epochs "
        "(exact; measured no faster than star by star, so off by default)",
    )
    parser.add_argument("--quiet", action="store_true", help="no progress and no summary")
    parser.add_argument("--json", action="store_true", help="print the summary as JSON")
    parser.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    from phasewise.core.batch import analyse_ledger, load_settings
    from phasewise.core.errors import PhasewiseError

    settings = load_settings(args.settings) if args.settings else None
    if args.ledger is not None:
        _import(args.paths, args.ledger, args.columns, quiet=args.quiet or args.json)
        ledger_path = args.ledger
    else:
        if len(args.paths) != 1:
            raise PhasewiseError(
                f"expected one ledger, got {len(args.paths)} paths; "
                "to import photometry files give --ledger NEW.ledger.sqlite"
            )
        if args.columns:
            raise PhasewiseError("--columns applies to imports; give --ledger NEW.ledger.sqlite")
        ledger_path = args.paths[0]
    bar = None if args.quiet else ProgressBar(sys.stderr)
    summary = analyse_ledger(
        ledger_path,
        settings,
        workers=args.workers,
        scheduler=args.scheduler,
        only=args.only,
        chunk_size=args.chunk_size,
        progress=bar,
        shared_epochs=args.shared_epochs,
    )
    if bar is not None:
        bar.close()
    finalised = 0 if summary.interrupted else _finalise(ledger_path)
    if args.json:
        print(json.dumps(summary.to_dict(), indent=2))
    elif not args.quiet:
        print(summary_text(summary))
        if finalised:
            print(f"  final numbers of {finalised} decided star(s) follow the new results")
    return 130 if summary.interrupted else 0


def _finalise(ledger_path: Path) -> int:
    """Recompute the final numbers of verdicts whose star was analysed again."""
    from phasewise.core.final import finalise_stars
    from phasewise.core.ledger import Ledger

    with Ledger.open(ledger_path) as ledger:
        return finalise_stars(ledger)


def _import(files: list[Path], ledger_path: Path, columns: str | None, *, quiet: bool) -> None:
    from phasewise.core.errors import PhasewiseError
    from phasewise.core.io import ColumnMapping, open_photometry
    from phasewise.core.ledger import Ledger, file_checksum

    if ledger_path.exists():
        raise PhasewiseError(
            "a file of that name exists; choose another name for the new ledger, or "
            "analyse the existing one without --ledger",
            file=ledger_path,
        )
    mapping = ColumnMapping.parse(columns) if columns else None
    sources = [open_photometry(path, mapping) for path in files]  # all readable before writing
    # built beside and moved into place only when complete: a half import is no ledger,
    # and a killed import leaves nothing that blocks the rerun
    with Ledger.building(ledger_path) as ledger:
        for path, source in zip(files, sources, strict=True):
            checksum = file_checksum(path) if path.is_file() else None
            added = ledger.add_stars(
                source.stars(), source_file=str(path), source_checksum=checksum
            )
            report = source.report
            if not quiet:
                print(
                    terminal_text(
                        f"{path}: {added} stars imported; rows read {report.rows_read}, "
                        f"skipped {report.rows_skipped}"
                    )
                )


def _clock(seconds: float | None) -> str:
    if seconds is None:
        return "--:--"
    seconds = int(round(seconds))
    hours, rest = divmod(seconds, 3600)
    minutes, secs = divmod(rest, 60)
    return f"{hours}:{minutes:02d}:{secs:02d}" if hours else f"{minutes:02d}:{secs:02d}"


def progress_text(p: Progress, width: int = 30) -> str:
    """``[#####.....] 120/300 stars  3 failed  12.3 stars/s  00:14 left``."""
    filled = int(round(width * p.fraction))
    bar = "#" * filled + "." * (width - filled)
    failed = f"  {p.failed} failed" if p.failed else ""
    return f"[{bar}] {p.done}/{p.total} stars{failed}  {p.rate:.1f} stars/s  {_clock(p.eta)} left"


class ProgressBar:
    """Progress on a stream: one redrawn line on a terminal, plain lines elsewhere."""

    def __init__(self, stream) -> None:
        self.stream = stream
        self.tty = bool(getattr(stream, "isatty", lambda: False)())
        self._last_plain = -float("inf")
        self._drawn = False

    def __call__(self, p: Progress) -> None:
        if p.total == 0:
            return
        text = progress_text(p)
        if self.tty:
            self.stream.write("\r" + text)
            self._drawn = True
        else:
            now = time.monotonic()
            if p.done in (0, p.total) or now - self._last_plain >= PLAIN_EVERY:
                self.stream.write(text + "\n")
                self._last_plain = now
        self.stream.flush()

    def close(self) -> None:
        if self.tty and self._drawn:
            self.stream.write("\n")
            self.stream.flush()


def summary_text(summary: BatchSummary) -> str:
    """The closing lines of a run."""
    lines = [
        f"{summary.ledger}: analysed {summary.analysed}, failed {summary.failed}, "
        f"skipped {summary.skipped} (already analysed with these settings) "
        f"in {_clock(summary.elapsed)} ({summary.rate:.1f} stars/s, {summary.engine}, "
        f"{summary.workers} worker{'s' if summary.workers != 1 else ''})"
    ]
    if summary.remaining:
        why = "interrupted" if summary.interrupted else "stopped"
        lines.append(f"{why}: {summary.remaining} stars left; run again to analyse them")
    if summary.stale_left:
        lines.append(
            f"{summary.stale_left} stars have results of other settings (or points excluded "
            "since); --only stale analyses them again"
        )
    for star_id, message in summary.failures[:SHOWN_FAILURES]:
        lines.append(terminal_text(f"  failed {star_id}: {message}"))
    if summary.failed > SHOWN_FAILURES:
        lines.append(f"  ... and {summary.failed - SHOWN_FAILURES} more (stored in the ledger)")
    return "\n".join(lines)
