"""Scoring a star's features against the rulebook.

Each rule gives a soft membership in [0, 1]: 1 inside its range, falling
linearly to 0 one margin outside.  A class's score is the weighted mean of the
memberships of the rules whose feature is present.  Missing features neither
help nor hurt the mean, but lower confidence a little: the score is multiplied
by ``1 - missing_penalty * (missing weight / total weight)``.  A rule marked
``required`` makes the class score 0 when its feature is missing; a rule
marked ``gate`` also multiplies the score by its membership (used for the
significance of the period, which no amount of shape evidence replaces).

Periods tried per class:

* the periodogram's period P;
* eclipsing classes: ``2 P`` instead, when the fold at 2P shows two minima
  (``second_harmonic_weight >= two_minima_weight``) and the fold at P does not
  already show two dips (``two_minima_at_p`` is not 1) — the usual case where
  the periodogram finds half the orbital period; significantly unequal
  alternate minima at 2P (``unequal_minima`` = 1: the curve does not repeat
  at P) also call for 2P when the fold at P shows a single dip;
* when the analysis marks the chosen peak as an alias (``is_alias = 1``) and
  gives the other period (``alias_period``), that period too; the better one
  is kept and the suggestion says which.

Only ``period`` and ``log_period`` change with the trial period; the Fourier
shape parameters stay those measured at P.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

from ..classes import CLASSES
from .features import feature_info
from .rulebook import ClassRules, Rule, Rulebook, load_rulebook

__all__ = ["Suggestion", "suggest", "clean_features"]

_PERIOD_FEATURES = ("period", "log_period")


@dataclass(frozen=True)
class Suggestion:
    """One class suggestion with its evidence.

    Attributes
    ----------
    class_code : str
        Class code from the rulebook (e.g. ``"RRab"``, ``"DCEP(1O)"``).
    score : float
        In [0, 1]; higher is a better fit of the rules.
    reasons, against : tuple of str
        Rules that argued for and against, in plain words.
    period : float or None
        The period this suggestion implies (d); may differ from the
        periodogram's (2P for eclipsing binaries, or the alias period).
    note : str
        Anything the person should check (half period, alias, nightly sampling).
    subtype : str or None
        E.g. ``"W Vir"`` for T2CEP, ``"HADS"`` for DSCT.
    missing : tuple of str
        Features the class's rules needed but the analysis did not give.
    """

    class_code: str
    score: float
    reasons: tuple[str, ...]
    against: tuple[str, ...]
    period: float | None
    note: str = ""
    subtype: str | None = None
    missing: tuple[str, ...] = ()

    def to_dict(self) -> dict[str, Any]:
        return {
            "class": self.class_code,
            "subtype": self.subtype,
            "score": round(self.score, 4),
            "reasons": list(self.reasons),
            "against": list(self.against),
            "missing": list(self.missing),
            "period": self.period,
            "note": self.note,
        }


def clean_features(features: Mapping[str, Any]) -> dict[str, Any]:
    """Plain floats (NaN → None), with ``log_period``, ``amplitude`` and
    ``depth_difference_fraction`` filled in when absent (the depth
    difference less its error, over the amplitude)."""
    out: dict[str, Any] = {}
    for name, value in features.items():
        if value is None or isinstance(value, str):
            out[name] = value
            continue
        if isinstance(value, bool):
            out[name] = float(value)
            continue
        try:
            number = float(value)
        except (TypeError, ValueError):
            out[name] = None
            continue
        out[name] = number if math.isfinite(number) else None
    period = out.get("period")
    if out.get("log_period") is None and period is not None and period > 0:
        out["log_period"] = math.log10(period)
    band = out.get("primary_band")
    if out.get("amplitude") is None and isinstance(band, str):
        out["amplitude"] = out.get(f"amplitude_{band}")
    noise = out.get("residual_std")
    if out.get("amplitude_to_noise") is None and out.get("amplitude") is not None and noise:
        out["amplitude_to_noise"] = out["amplitude"] / noise
    depth, amplitude = out.get("depth_difference"), out.get("amplitude")
    if out.get("depth_difference_fraction") is None and depth is not None and amplitude:
        # the smallest difference the data support (one sigma below the
        # measured one): noise alone makes equal minima look unequal
        depth_err = out.get("depth_difference_err") or 0.0
        out["depth_difference_fraction"] = max(0.0, abs(depth) - abs(depth_err)) / amplitude
    return out


def _fmt(value: float) -> str:
    if value == 0 or 0.01 <= abs(value) < 1000:
        return f"{value:.3g}" if abs(value) < 1 else f"{value:.4g}"
    return f"{value:.3g}"


def _describe(rule: Rule, value: float, code: str, member: float) -> str:
    info = feature_info(rule.feature)
    unit = f" {info.unit}" if info and info.unit and info.unit not in ("phase", "dex") else ""
    shown = f"{rule.feature} {_fmt(value)}{unit}" if unit else f"{rule.feature} = {_fmt(value)}"
    # "RRab range" would only repeat the sentence; keep words that add something.
    words = f": {rule.says}" if rule.says and not rule.says.endswith(" range") else ""
    if member >= 1.0:
        return f"{shown} lies in the {code} range {rule.range_text()}{unit}{words}"
    if member > 0.0:
        return (
            f"{shown} lies just outside the {code} range {rule.range_text()}{unit} "
            f"(membership {member:.2f})"
        )
    return f"{shown} lies outside the {code} range {rule.range_text()}{unit}"


@dataclass(frozen=True)
class _Trial:
    score: float
    reasons: tuple[str, ...]
    against: tuple[str, ...]
    missing: tuple[str, ...]
    values: dict


def _score_class(entry: ClassRules, values: Mapping[str, Any], penalty: float) -> _Trial:
    total = sum(rule.weight for rule in entry.rules)
    present = weighted = 0.0
    gate = 1.0
    reasons, against, missing = [], [], []
    for rule in entry.rules:
        value = values.get(rule.feature)
        if value is None or isinstance(value, str):
            missing.append(rule.feature)
            if rule.required:
                against.append(f"{rule.feature} is needed for {entry.code} but was not measured")
            continue
        member = rule.membership(value)
        if rule.gate:
            gate *= member
        present += rule.weight
        weighted += rule.weight * member
        (reasons if member >= 0.5 else against).append(_describe(rule, value, entry.code, member))
    if present == 0 or any(r.required and r.feature in missing for r in entry.rules):
        score = 0.0
    else:
        missing_weight = total - present
        score = gate * (weighted / present) * (1.0 - penalty * missing_weight / total)
    # Rounded so that float noise does not reorder equal scores.
    score = round(min(1.0, max(0.0, score)), 9)
    return _Trial(score, tuple(reasons), tuple(against), tuple(missing), dict(values))


def _with_period(values: Mapping[str, Any], period: float) -> dict[str, Any]:
    trial = dict(values)
    trial["period"] = period
    trial["log_period"] = math.log10(period)
    return trial


def _nightly_note(period: float | None) -> str:
    if period is None or period <= 0:
        return ""
    frequency = 1.0 / period
    if not math.isfinite(frequency):  # a denormal period: nothing near 1 c/d
        return ""
    nearest = round(frequency)
    if 1 <= nearest <= 4 and abs(frequency - nearest) < 0.02:
        return (
            f"period {period:.4g} d is close to 1/{nearest} d: nightly sampling makes periods "
            "near 1 d and its submultiples ambiguous; check the alias candidates"
        )
    return ""


def _claims_period(code: str) -> bool:
    """Whether a suggestion of ``code`` proposes a period (registry classes
    without one, and UNKNOWN, do not; a user rulebook's own classes do)."""
    info = CLASSES.get(code)
    return code != "UNKNOWN" and (info is None or info.periodic)


def _subtype(entry: ClassRules, values: Mapping[str, Any]) -> str | None:
    for sub in entry.subtypes:
        value = values.get(sub.feature)
        if value is not None and not isinstance(value, str) and sub.low <= value <= sub.high:
            return sub.name
    return None


def _evaluate(entry: ClassRules, values: dict[str, Any], book: Rulebook) -> Suggestion:
    period = values.get("period")
    notes: list[str] = []
    trial_values = values
    used = period
    if entry.eclipsing and period is not None and period > 0:
        weight = values.get("second_harmonic_weight")
        already_orbital = values.get("two_minima_at_p") == 1.0
        # significantly unequal alternate minima: the curve does not repeat at P
        unequal = values.get("unequal_minima") == 1.0
        two_minima = weight is not None and weight >= book.two_minima_weight
        if entry.double_when == "unequal":
            two_minima = False  # one visible eclipse a cycle already marks the orbit
        if (unequal or two_minima) and not already_orbital:
            used = 2.0 * period
            trial_values = _with_period(values, used)
            depth = values.get("depth_difference")
            depth_err = values.get("depth_difference_err")
            depth_text = ""
            if depth is not None:
                depth_text = f"; alternate minima differ by {_fmt(depth)}"
                depth_text += f" ± {_fmt(depth_err)} mag" if depth_err is not None else " mag"
            notes.append(
                f"the periodogram's period {period:.6g} d is likely half the true one: folded at "
                f"2P = {used:.6g} d the curve shows two minima (second-harmonic weight "
                f"{'unknown' if weight is None else _fmt(weight)}{depth_text}"
                + (", significantly unequal" if unequal else "")
                + "); period 2P proposed"
            )
    best = _score_class(entry, trial_values, book.missing_penalty)
    alias = values.get("alias_period")
    if values.get("is_alias") and period is not None:
        if alias is not None and alias > 0:
            other = _score_class(entry, _with_period(values, alias), book.missing_penalty)
            if other.score > best.score:
                notes.append(
                    f"the chosen peak ({period:.6g} d) is marked as an alias; the other period "
                    f"{alias:.6g} d fits {entry.code} better and is proposed — check both folds"
                )
                best, used = other, alias
            else:
                notes.append(
                    f"the chosen peak is marked as an alias of {alias:.6g} d; check both folds"
                )
        else:
            notes.append("the chosen peak is marked as an alias; check the other candidates")
    claims_period = _claims_period(entry.code)
    if claims_period:
        nightly = _nightly_note(used)
        if nightly:
            notes.append(nightly)
    return Suggestion(
        class_code=entry.code,
        score=best.score,
        reasons=best.reasons,
        against=best.against,
        period=used if claims_period else None,
        note="; ".join(notes),
        subtype=_subtype(entry, best.values),
        missing=best.missing,
    )


def suggest(
    features: Mapping[str, Any], rulebook: Rulebook | None = None
) -> tuple[Suggestion, ...]:
    """Rank the rulebook's classes for one star.

    Parameters
    ----------
    features : mapping
        Named numbers (see :data:`core.classify.FEATURES`); missing = None.
    rulebook : Rulebook, optional
        Defaults to :func:`load_rulebook` (the user copy if present, else the
        shipped one).

    Returns
    -------
    tuple of Suggestion
        Every class of the rulebook, best first (ties keep the rulebook order).

    Notes
    -----
    Suggestions come from empirical boundaries with overlaps and scatter;
    the astronomer decides.
    """
    book = rulebook if rulebook is not None else _default_rulebook()
    values = clean_features(features)
    ranked: list[Suggestion] = []
    fixed: list[ClassRules] = []
    for entry in book.classes:
        if entry.fixed_score is not None and not entry.rules:
            fixed.append(entry)
        else:
            ranked.append(_evaluate(entry, values, book))
    best_score = max((s.score for s in ranked), default=0.0)
    for entry in fixed:
        assert entry.fixed_score is not None
        if best_score < entry.fixed_score:
            reasons = (f"no class scores above {entry.fixed_score:g} (best {best_score:.2f})",)
        else:
            reasons = ()
        ranked.append(Suggestion(entry.code, entry.fixed_score, reasons, (), None))
    order = {code: i for i, code in enumerate(book.codes)}
    ranked.sort(key=lambda s: (-round(s.score, 9), order[s.class_code]))
    return tuple(ranked)


_CACHE: dict[tuple[str, float], Rulebook] = {}


def _default_rulebook() -> Rulebook:
    from .rulebook import shipped_rulebook_path, user_rulebook_path

    path = user_rulebook_path()
    if not path.is_file():
        path = shipped_rulebook_path()
    key = (str(path), path.stat().st_mtime)
    if key not in _CACHE:
        _CACHE.clear()
        _CACHE[key] = load_rulebook(path)
    return _CACHE[key]
