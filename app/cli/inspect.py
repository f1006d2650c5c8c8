"""``phasewise inspect``: analyse one star from a file and print the result."""

from __future__ import annotations

import json
import math

from phasewise.core.errors import PhasewiseError

#: Candidates and suggestions printed in the readable summary.
SHOWN = 5


def register(subparsers) -> None:
    parser = subparsers.add_parser(
        "inspect",
        help="analyse one star from a file and print period, Fourier parameters and suggestions",
        description=(
            "Analyse one star: periodogram, candidate periods with their marks, refined "
            "period, Fourier decomposition, further frequencies, class suggestions and "
            "physical values. Suggestions and distances come from published empirical "
            "relations with known scatter; the astronomer decides."
        ),
    )
    parser.add_argument("file", metavar="FILE", help="photometry file or folder of one-star files")
    parser.add_argument("--star", metavar="ID", help="the star to analyse (needed if several)")
    parser.add_argument(
        "--columns",
        metavar="ROLE=NAME,...",
        help="choose columns, e.g. time=hjd,mag=V,err=eV,band=filter,id=name; "
        "err and band are optional (without errors all points weigh the same)",
    )
    parser.add_argument(
        "--method",
        choices=("gls", "mhgls", "pdm", "ce"),
        default=None,
        help="periodogram: generalised Lomb-Scargle (default), multi-harmonic, "
        "phase dispersion minimisation, conditional entropy",
    )
    parser.add_argument(
        "--settings",
        metavar="FILE",
        help="analysis settings (TOML, as for 'phasewise analyse'); the options below override it",
    )
    parser.add_argument(
        "--period-range",
        metavar="SHORTEST,LONGEST",
        help="search periods between these two lengths in days, e.g. 0.2,30 "
        "(default: from the sampling and the baseline)",
    )
    parser.add_argument("--json", action="store_true", help="print the result as JSON")
    parser.set_defaults(func=run)


def _load_star(path: str, star: str | None, columns: str | None):
    from phasewise.core.io import ColumnMapping, open_photometry

    mapping = ColumnMapping.parse(columns) if columns else None
    source = open_photometry(path, mapping)
    if star is not None:
        return source.star(star)
    ids = source.star_ids()
    if len(ids) != 1:
        shown = ", ".join(ids[:5]) + (" …" if len(ids) > 5 else "")
        raise PhasewiseError(
            f"holds {len(ids)} stars ({shown}); choose one with --star ID", file=path
        )
    return source.star(ids[0])


def parse_period_range(text: str) -> tuple[float, float]:
    """``"SHORTEST,LONGEST"`` in days to a frequency range ``(fmin, fmax)`` in c/d."""
    parts = text.replace(":", ",").split(",")
    try:
        shortest, longest = (float(p) for p in parts)
    except ValueError:
        raise PhasewiseError(
            f"got {text!r}; expected two periods in days, e.g. 0.2,30", field="--period-range"
        ) from None
    if not (0 < shortest < longest and math.isfinite(longest)):
        raise PhasewiseError(
            f"got {text!r}; expected 0 < shortest < longest (days)", field="--period-range"
        )
    return 1.0 / longest, 1.0 / shortest


def _settings(args):
    from dataclasses import replace

    from phasewise.core.analysis import AnalysisSettings
    from phasewise.core.batch import load_settings

    settings = load_settings(args.settings) if args.settings else AnalysisSettings()
    changes = {}
    if args.method is not None:
        changes["method"] = args.method
    if args.period_range is not None:
        changes["fmin"], changes["fmax"] = parse_period_range(args.period_range)
    if changes:
        settings = replace(settings, periodogram=replace(settings.periodogram, **changes))
    return settings


def run(args) -> int:
    from phasewise.core.analysis import analyse

    settings = _settings(args)
    lc = _load_star(args.file, args.star, args.columns)
    result = analyse(lc, settings).to_dict()
    if args.json:
        print(json.dumps(result, indent=2, allow_nan=False))
    else:
        print_summary(result)
    return 0 if result["status"] != "failed" else 1


def _fmt(value, digits: int = 4, err=None) -> str:
    if value is None or (isinstance(value, float) and not math.isfinite(value)):
        return "—"
    text = f"{value:.{digits}f}"
    if err is not None:
        text += f" ± {err:.{digits}f}" if err >= 10 ** (-digits) else f" ± {err:.1e}"
    return text


def print_summary(r: dict) -> None:
    """A readable summary of a result dict."""
    print(
        f"star {r['star_id']}: {r['n_good']} good of {r['n_points']} points, "
        f"bands {', '.join(r['bands']) or '—'}, time scale {r['time_scale']}"
    )
    print(f"status: {r['status']}" + (f" ({r['reason']})" if r["reason"] else ""))
    if r.get("period") is None:
        return
    print(
        f"period: {_fmt(r['period'], 7, r['period_err'])} d   "
        f"FAP {r['fap']:.2g}   method {r['method']}"
    )
    print("candidates (* = chosen):")
    chosen = r.get("chosen_candidate")
    for i, c in enumerate(r["candidates"]):
        if i >= SHOWN and i != chosen:
            continue
        marks = f"  [{'; '.join(c['mark_details'] or c['marks'])}]" if c["marks"] else ""
        fap = "—" if c["fap"] is None else f"{c['fap']:.2g}"
        star = "*" if i == chosen else " "
        method = f"  ({c['fap_method']})" if c.get("fap_method") else ""
        print(f" {star}P = {c['period']:.6f} d  power {c['power']:.3f}  FAP {fap}{method}{marks}")
    for band, f in r["fourier_by_band"].items():
        print(
            f"{band}: mean {_fmt(f['mean_mag'], 3)}  amplitude {_fmt(f['peak_to_peak'], 3)}  "
            f"order {f['order']}  R21 {_fmt(f['R21'], 3, f['R21_err'])}  "
            f"R31 {_fmt(f['R31'], 3, f['R31_err'])}  phi21 {_fmt(f['phi21'], 3, f['phi21_err'])}  "
            f"phi31 {_fmt(f['phi31'], 3, f['phi31_err'])} ({f['form']})"
        )
    print(
        f"epoch of maximum: {_fmt(r['epoch_max'], 5)} ({r['time_scale']})   "
        f"rise time {_fmt(r['rise_time'], 3)}"
    )
    if r.get("relation_band_reason"):
        print(f"Fourier parameters for the relations: {r['relation_band_reason']}")
    for s in r["secondary_periods"]:
        print(
            f"secondary period: P = {s['period']:.6f} d  ({s['kind']}: {s['label']}, "
            f"S/N {_fmt(s.get('snr'), 1)})"
        )
    if r["period_ratio"] is not None:
        print(f"period ratio: {r['period_ratio']:.4f}")
    if r.get("modulation"):
        period = r["modulation"].get("period")
        text = f", period {period:.4g} d" if period else ""
        print(f"modulation: {r['modulation']['kind']}{text}")
    if r.get("trend"):
        print(f"trend removed: {r['trend']['description']}")
    if r.get("set_aside"):
        print(f"points set aside: {len(r['set_aside'])} (indices {r['set_aside'][:10]})")
    print("suggestions (empirical rules with known overlaps; the astronomer decides):")
    for s in r["suggestions"][:3]:
        period = f", period {s['period']:.6f} d" if s.get("period") else ""
        print(f"  {s['class']} score {s['score']:.2f}{period}")
        for reason in s["reasons"][:4]:
            print(f"    + {reason}")
        for reason in s["against"][:3]:
            print(f"    - {reason}")
        if s.get("note"):
            print(f"    note: {s['note']}")
    if r["physics"]:
        print("physical values (published relations with known scatter):")
        for p in r["physics"]:
            flags = f"  [{'; '.join(p['flags'])}]" if p["flags"] else ""
            print(
                f"  {p['quantity']} = {_fmt(p['value'], 3, p['err'])} {p['unit']}  "
                f"({p['relation']}){flags}"
            )
    for flag in r["flags"]:
        print(f"flag: {flag}")
