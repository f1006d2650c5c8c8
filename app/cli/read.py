"""``phasewise read``: open photometry files and say what is in them."""

from __future__ import annotations

import json
from collections import Counter

from phasewise.app.cli.terminal import terminal_text
from phasewise.core.io import ColumnMapping, open_photometry

#: Skipped rows printed one by one (all are counted).
SHOWN_SKIPS = 10


def register(subparsers) -> None:
    parser = subparsers.add_parser(
        "read",
        help="open photometry files and list the stars, bands and skipped rows",
        description=(
            "Open photometry (CSV/TSV, ECSV, FITS, VOTable, or a folder of one-star files) "
            "and print the stars found, points per band, the time scale and skipped rows."
        ),
    )
    parser.add_argument("files", nargs="+", metavar="FILE", help="a file or a folder")
    parser.add_argument(
        "--columns",
        metavar="ROLE=NAME,...",
        help="choose columns, e.g. time=hjd,mag=V,err=eV,band=filter,id=name "
        "(also time_scale=HJD, zero_point=25, default_band=V)",
    )
    parser.add_argument("--table", help="which table of a FITS/VOTable file (name or number)")
    parser.add_argument("--json", action="store_true", help="print one JSON document")
    parser.set_defaults(func=run)


def _summary(path: str, mapping, table) -> dict:
    if table is not None and table.isdigit():
        table = int(table)
    source = open_photometry(path, mapping, table=table)
    bands: Counter = Counter()
    good: Counter = Counter()
    too_few = []
    for lc in source.stars():
        for label, count in zip(*_count(lc.band), strict=True):
            bands[label] += count
        for label, count in zip(*_count(lc.band[lc.good]), strict=True):
            good[label] += count
        if lc.too_few_points:
            too_few.append(lc.star_id)
    report = source.report.to_dict()
    report["points_per_band"] = dict(bands.most_common())
    report["good_points_per_band"] = dict(good.most_common())
    report["too_few_points"] = too_few
    return report


def _count(labels):
    import numpy as np

    names, counts = np.unique(np.asarray(labels).astype(str), return_counts=True)
    return [str(n) for n in names], [int(c) for c in counts]


def _print(summary: dict) -> None:
    for line in _lines(summary):
        print(terminal_text(line))


def _lines(summary: dict):
    yield f"{summary['source']}  ({summary['format']}, {summary['shape']})"
    yield f"  stars: {summary['n_stars']}"
    bands = ", ".join(f"{b} {n}" for b, n in summary["points_per_band"].items())
    yield f"  points per band: {bands}"
    yield f"  time scale: {summary['time_scale']}"
    used = ", ".join(f"{role}={name}" for role, name in summary["columns_used"].items())
    yield f"  columns used: {used}"
    if summary["table"]:
        yield f"  table: {summary['table']}"
    yield f"  rows read: {summary['rows_read']}, skipped: {summary['rows_skipped']}"
    for reason, count in summary["skip_counts"].items():
        yield f"    {count} x {reason}"
    for entry in summary["skipped"][:SHOWN_SKIPS]:
        yield f"    row {entry['row']}: {entry['reason']}"
    if summary["too_few_points"]:
        shown = ", ".join(summary["too_few_points"][:10])
        more = len(summary["too_few_points"]) - 10
        yield (
            f"  too few points: {len(summary['too_few_points'])} star(s): {shown}"
            + (f" and {more} more" if more > 0 else "")
        )
    for note in summary["notes"]:
        yield f"  note: {note}"


def run(args) -> int:
    mapping = ColumnMapping.parse(args.columns) if args.columns else None
    summaries = [_summary(path, mapping, args.table) for path in args.files]
    if args.json:
        print(json.dumps({"sources": summaries}, indent=2))
    else:
        for summary in summaries:
            _print(summary)
    return 0
