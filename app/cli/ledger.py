"""Ledger commands: ``ledger new``/``ledger info``, ``verdict``, ``finalise``, ``history``,
``undo``, ``redo``, ``export``.

Every change is one committed transaction in the ledger; these commands only
parse, call :mod:`core.ledger` / :mod:`core.export` and print.
"""

from __future__ import annotations

import argparse
import math
from pathlib import Path
from typing import Any

from phasewise.app.cli.terminal import terminal_text
from phasewise.core.errors import PhasewiseError
from phasewise.core.ledger import VERDICT_STATUSES, Ledger, file_checksum

DECISIONS = tuple(s for s in VERDICT_STATUSES if s != "unreviewed")


def _stars(n: int) -> str:
    return f"{n} star" if n == 1 else f"{n} stars"


def register(subparsers: argparse._SubParsersAction) -> None:
    ledger = subparsers.add_parser("ledger", help="make or describe a ledger (a vetting job)")
    actions = ledger.add_subparsers(dest="ledger_command", metavar="ACTION", required=True)
    new = actions.add_parser("new", help="make a ledger and import stars from photometry files")
    new.add_argument("ledger", type=Path, help="the new ledger, NAME.ledger.sqlite")
    new.add_argument("files", type=Path, nargs="+", help="photometry files or folders")
    new.add_argument(
        "--columns",
        help="choose columns, e.g. time=hjd,mag=V,err=eV,band=filter,star_id=name",
    )
    new.add_argument("--overwrite", action="store_true", help="replace an existing ledger")
    new.set_defaults(func=run_new)
    info = actions.add_parser("info", help="stars, verdict counts and analysis state")
    info.add_argument("ledger", type=Path, metavar="LEDGER")
    info.set_defaults(func=run_info)
    check = actions.add_parser(
        "check",
        help="check the whole file: SQLite's integrity check and every record's checksum",
    )
    check.add_argument("ledger", type=Path, metavar="LEDGER")
    check.set_defaults(func=run_check)
    unlock = actions.add_parser(
        "unlock",
        help="take over the write lock left by a process on another machine that is gone",
        description=(
            "Show who holds the ledger for writing. With --confirm-host HOST (the holder's "
            "host, as a confirmation that its process is gone), take the lock over; the "
            "take-over is written to the history. A live process on this machine is never "
            "overruled."
        ),
    )
    unlock.add_argument("ledger", type=Path, metavar="LEDGER")
    unlock.add_argument("--confirm-host", metavar="HOST", help="the holder's host name")
    unlock.set_defaults(func=run_unlock)

    verdict = subparsers.add_parser(
        "verdict",
        help="record a verdict on a star, or confirm every suggestion above a score",
    )
    verdict.add_argument("ledger", type=Path, metavar="LEDGER")
    verdict.add_argument(
        "star_id", nargs="?", metavar="STAR_ID", help="the star (omit with --confirm-above)"
    )
    verdict.add_argument("--status", choices=DECISIONS + ("unreviewed",))
    verdict.add_argument(
        "--class", dest="class_code", metavar="CLASS", help="class code, e.g. RRab (relabel)"
    )
    verdict.add_argument("--period", type=float, help="chosen period in days")
    verdict.add_argument("--note", help="a note kept with the verdict")
    verdict.add_argument(
        "--confirm-above",
        type=float,
        metavar="SCORE",
        help="confirm the top suggestion (class and period) of every unreviewed star "
        "whose top score is at least SCORE (0 to 1)",
    )
    verdict.add_argument("--dry-run", action="store_true", help="list what would be confirmed")
    verdict.set_defaults(func=run_verdict)

    finalise = subparsers.add_parser(
        "finalise",
        help="compute the final numbers (for the verdict's class and period) of decided stars",
        description=(
            "Compute and store the final numbers of decided stars: the Fourier terms, epoch, "
            "amplitudes and physics for the class and period of each verdict.  By default only "
            "verdicts whose numbers are missing or come from an earlier analysis."
        ),
    )
    finalise.add_argument("ledger", type=Path, metavar="LEDGER")
    finalise.add_argument("star_ids", nargs="*", metavar="STAR_ID", help="only these stars")
    finalise.add_argument(
        "--all", action="store_true", help="recompute every decided star's numbers"
    )
    finalise.set_defaults(func=run_finalise)

    history = subparsers.add_parser("history", help="print the history of changes")
    history.add_argument("ledger", type=Path, metavar="LEDGER")
    history.add_argument("star_id", nargs="?", metavar="STAR_ID", help="only this star")
    history.set_defaults(func=run_history)

    for name, text in (("undo", "undo the latest change"), ("redo", "redo the last undone change")):
        walk = subparsers.add_parser(name, help=text)
        walk.add_argument("ledger", type=Path, metavar="LEDGER")
        walk.set_defaults(func=run_walk, direction=name)

    export = subparsers.add_parser("export", help="write the vetted catalogue")
    export.add_argument("ledger", type=Path, metavar="LEDGER")
    export.add_argument("-o", "--output", type=Path, required=True, help="catalogue file")
    export.add_argument("--format", choices=("ecsv", "fits", "votable", "csv"))
    export.add_argument(
        "--status",
        action="append",
        help="verdict states to include (repeat or comma-separate; default: confirmed,relabelled)",
    )
    export.set_defaults(func=run_export)


# ----------------------------------------------------------------- ledger new
def run_new(args: argparse.Namespace) -> int:
    from phasewise.core.io import ColumnMapping, open_photometry

    if args.ledger.exists() and not args.overwrite:
        raise PhasewiseError(
            "a file of that name exists; choose another name, or give --overwrite to "
            "replace it (the old ledger stays until the new one is complete)",
            file=args.ledger,
        )
    mapping = ColumnMapping.parse(args.columns) if args.columns else None
    sources = [open_photometry(path, mapping) for path in args.files]  # all readable first
    # built beside the target and moved into place only when every import
    # succeeded: an error, Ctrl-C or a full disk leaves an old ledger as it was
    with Ledger.building(args.ledger, overwrite=args.overwrite) as ledger:
        for path, source in zip(args.files, sources, strict=True):
            checksum = file_checksum(path) if path.is_file() else None
            added = ledger.add_stars(
                source.stars(), source_file=str(path), source_checksum=checksum
            )
            report = source.report
            print(
                f"{terminal_text(path)}: {_stars(added)} imported; rows read "
                f"{report.rows_read}, skipped {report.rows_skipped}"
            )
            for reason, count in report.skip_counts.items():
                print(f"  {count} x {terminal_text(reason)}")
            for note in report.notes:
                print(f"  note: {terminal_text(note)}")
        n_stars = ledger.n_stars
        if not n_stars:
            raise PhasewiseError("no star was imported; the ledger was not made", file=args.ledger)
    print(f"{terminal_text(args.ledger)}: {_stars(n_stars)}")
    return 0


def run_check(args: argparse.Namespace) -> int:
    with Ledger.open(args.ledger, readonly=True) as ledger:
        problems = ledger.check()
        n = ledger.n_stars
    if not problems:
        print(
            f"{terminal_text(args.ledger)}: ok ({_stars(n)}; SQLite check and every record checksum)"
        )
        return 0
    stars = sorted({p.star_id for p in problems if p.star_id is not None})
    print(f"{terminal_text(args.ledger)}: {len(problems)} problem(s) found")
    for problem in problems:
        print(f"  {terminal_text(problem.describe())}")
    if stars:
        shown = ", ".join(terminal_text(s) for s in stars[:20])
        more = f" and {len(stars) - 20} more" if len(stars) > 20 else ""
        print(f"  stars affected ({len(stars)}): {shown}{more}")
    print("  restore the ledger from a copy, or re-import and re-analyse the stars named")
    return 1


def run_unlock(args: argparse.Namespace) -> int:
    from phasewise.core.ledger import lock_holder_of

    holder = lock_holder_of(args.ledger)
    if holder is None:
        print(f"{terminal_text(args.ledger)}: not held for writing; nothing to do")
        return 0
    print(f"{terminal_text(args.ledger)}: held by {terminal_text(holder.describe())}")
    if args.confirm_host is None:
        print(
            "  if that process is gone (a crashed container, a copied file), take the lock "
            f"over with: phasewise ledger unlock LEDGER --confirm-host {terminal_text(holder.host)}"
        )
        return 1
    if args.confirm_host != holder.host:
        raise PhasewiseError(
            f"the lock is held from host {holder.host!r}, not {args.confirm_host!r}; "
            "nothing was changed",
            file=args.ledger,
            field="confirm-host",
        )
    with Ledger.open(args.ledger, take_over=holder):
        pass
    print(
        f"{terminal_text(args.ledger)}: lock taken over from {terminal_text(holder.describe())}; "
        "recorded in the history"
    )
    return 0


def run_info(args: argparse.Namespace) -> int:
    with Ledger.open(args.ledger, readonly=True) as ledger:
        rows = ledger.star_rows()
        counts = ledger.status_counts()
        print(f"{terminal_text(args.ledger)}: {_stars(ledger.n_stars)}")
        print("  " + ", ".join(f"{status} {n}" for status, n in counts.items()))
        analysed = sum(r.analysed for r in rows)
        print(
            f"  analysed {analysed}, failed {sum(r.failed for r in rows)}, "
            f"stale {sum(r.stale for r in rows)}, settings {ledger.settings_hash or 'none'}"
        )
        holder = ledger.lock_holder()
        if holder:
            print(f"  open for writing by {terminal_text(holder.describe())}")
    return 0


# -------------------------------------------------------------------- verdict
def run_verdict(args: argparse.Namespace) -> int:
    if args.confirm_above is not None:
        if args.star_id or args.status or args.class_code or args.period or args.note:
            raise PhasewiseError(
                "--confirm-above works on every unreviewed star; give no STAR_ID, "
                "--status, --class, --period or --note with it",
                field="confirm-above",
            )
        return _confirm_above(args)
    if not args.star_id or not args.status:
        raise PhasewiseError(
            "give a STAR_ID and --status (or --confirm-above SCORE)", file=args.ledger
        )
    if args.dry_run:
        raise PhasewiseError("--dry-run goes with --confirm-above", field="dry-run")
    from phasewise.core.final import record_verdict

    with Ledger.open(args.ledger) as ledger:
        verdict = record_verdict(
            ledger,
            args.star_id,
            args.status,
            class_code=args.class_code,
            period=args.period,
            note=args.note,
        )
    print(terminal_text(f"{args.ledger}: {verdict.star_id}: {_verdict_text(verdict.to_dict())}"))
    if verdict.status in ("confirmed", "relabelled") and verdict.final is None:
        print(
            "  note: no final numbers (the star has no usable analysis); the catalogue "
            "leaves its numbers blank until it is analysed"
        )
    elif verdict.final and verdict.final.get("period") is not None:
        final = verdict.final
        print(
            f"  final numbers: {final['class']} P={final['period']:.7g} d "
            f"(from the {final['period_source']}), epoch at {final['epoch_kind']}"
        )
    return 0


def _confirm_above(args: argparse.Namespace) -> int:
    score = args.confirm_above
    if not (0.0 <= score <= 1.0):
        raise PhasewiseError(f"scores lie between 0 and 1; got {score}", field="confirm-above")
    with Ledger.open(args.ledger, readonly=args.dry_run) as ledger:
        chosen, stale = [], 0
        for row in ledger.star_rows():
            if row.status != "unreviewed" or row.suggested_class is None:
                continue
            if row.suggested_score is None or row.suggested_score < score:
                continue
            if row.stale:
                stale += 1  # the suggestion belongs to old settings or an old mask
                continue
            chosen.append(row)
        verb = "would confirm" if args.dry_run else "confirmed"
        for row in chosen:
            period = "" if row.suggested_period is None else f" P={row.suggested_period:.7g} d"
            print(
                terminal_text(
                    f"{verb} {row.star_id}: {row.suggested_class}{period} "
                    f"(score {row.suggested_score:.3f})"
                )
            )
        if not args.dry_run and chosen:
            from phasewise.core.final import record_verdicts

            record_verdicts(
                ledger,
                [
                    (r.star_id, "confirmed", r.suggested_class, r.suggested_period, None)
                    for r in chosen
                ],
                label=f"confirm {len(chosen)} suggestions with score >= {score:g}",
            )
    print(f"{args.ledger}: {_stars(len(chosen))} {verb} with top score >= {score:g}")
    if stale:
        print(f"  skipped {_stars(stale)} whose analysis is stale; analyse them again first")
    return 0


def run_finalise(args: argparse.Namespace) -> int:
    from phasewise.core.final import finalise_stars

    with Ledger.open(args.ledger) as ledger:
        n = finalise_stars(ledger, args.star_ids or None, only_stale=not args.all)
    print(f"{args.ledger}: final numbers of {_stars(n)} computed")
    return 0


# ------------------------------------------------------------ history and undo
def _value_text(what: str, value: Any) -> str:
    if value is None:
        return "-"
    if what == "verdict":
        return _verdict_text(value)
    if what == "excluded":
        reason = f" ({value['reason']})" if value.get("reason") else ""
        return f"{len(value['indices'])} points excluded{reason}"
    if what == "import":
        return f"{value['n_stars']} stars from {value.get('source_file') or 'memory'}"
    if what == "analysis_settings":
        return f"settings {value['settings_hash']}"
    if what == "lock":
        return f"lock of process {value.get('pid')} on {value.get('host')}"
    return str(value)


def _verdict_text(value: dict[str, Any]) -> str:
    parts = [value["status"]]
    if value.get("class_code"):
        parts.append(value["class_code"])
    period = value.get("period")
    if period is not None and math.isfinite(period):
        parts.append(f"P={period:.7g} d")
    if value.get("note"):
        parts.append(f"note {value['note']!r}")
    return " ".join(parts)


def run_history(args: argparse.Namespace) -> int:
    with Ledger.open(args.ledger, readonly=True) as ledger:
        entries = ledger.history(args.star_id)
    if not entries:
        print(f"{args.ledger}: no history" + (f" for {args.star_id}" if args.star_id else ""))
    for e in entries:
        star = e.star_id or "-"
        change = f"{_value_text(e.what, e.old)} -> {_value_text(e.what, e.new)}"
        print(terminal_text(f"{e.id:6d}  {e.at}  {e.kind:8s} {star:16s} {e.what}: {change}"))
    return 0


def run_walk(args: argparse.Namespace) -> int:
    with Ledger.open(args.ledger) as ledger:
        action = ledger.undo() if args.direction == "undo" else ledger.redo()
    if action is None:
        print(f"{args.ledger}: nothing to {args.direction}")
        return 1
    print(terminal_text(f"{args.ledger}: {action.label}"))
    for e in action.entries:
        change = f"{_value_text(e.what, e.old)} -> {_value_text(e.what, e.new)}"
        print(terminal_text(f"  {e.star_id}: {change}"))
    return 0


# --------------------------------------------------------------------- export
def run_export(args: argparse.Namespace) -> int:
    from phasewise.core.export import write_catalogue
    from phasewise.core.io.writers import remove_abandoned_temps

    remove_abandoned_temps(args.output, ".partial")  # left by killed exports

    statuses = ("confirmed", "relabelled")
    if args.status:
        statuses = tuple(s.strip() for item in args.status for s in item.split(",") if s.strip())
    with Ledger.open(args.ledger, readonly=True) as ledger:
        n = write_catalogue(ledger, args.output, format=args.format, statuses=statuses)
    print(terminal_text(f"{args.output}: {_stars(n)} ({', '.join(statuses)}) from {args.ledger}"))
    return 0
