"""Reading and checking the rulebook (TOML; ranges on named features).

The rulebook is data only: no code, no eval.  Layout::

    [scoring]
    missing_penalty = 0.15      # score lost when every rule's feature is missing
    two_minima_weight = 0.5     # 2nd-harmonic weight at 2P that means "two minima"

    [class.RRab]                # class code: one of CLASS_CODES
    label = "fundamental-mode RR Lyrae"

    [class.RRab.period]         # a rule: the table name is a feature name
    range = [0.45, 1.0]         # inside: membership 1; inf is allowed
    margin = 0.05               # outside: falls linearly to 0 one margin away
    weight = 3.0
    says = "RRab range"         # optional words used in the reasons
    required = false            # optional; true: the class scores 0 without it
    gate = false                # optional; true: the score is also multiplied by
                                # this rule's membership (e.g. significance)
    source = "common practice, no source"

    [class.T2CEP.subtype."W Vir"]   # subtypes are chosen by one feature's range
    feature = "period"
    range = [4.0, 20.0]
    source = "Matsunaga, Feast & Menzies 2009"

Class tables may also hold ``eclipsing = true`` (score at 2P when the fold at
2P shows two minima), ``double_when`` for an eclipsing class (``"two_minima"``,
the default: the second-harmonic weight or unequal minima at 2P double the
period; ``"unequal"``: only significantly unequal minima do, for detached
binaries whose one visible eclipse per cycle already marks the orbit) and,
for UNKNOWN only, ``score`` (its fixed score).

The shipped copy is ``core/classify/rulebook.toml``.  A user copy replaces it
as a whole: pass its path to :func:`load_rulebook`, or put it at
:func:`user_rulebook_path` (``$XDG_CONFIG_HOME/phasewise/rulebook.toml``,
default ``~/.config/phasewise/rulebook.toml``).

Every problem raises :class:`~core.errors.RulebookError` naming the file and
the line.  ``tomllib`` gives no line numbers for values, so the line is found
by searching the text for the key inside its table.
"""

from __future__ import annotations

import math
import os
import re
import tomllib
from dataclasses import dataclass
from importlib import resources
from pathlib import Path
from typing import Any

from ..classes import CLASS_CODES as _REGISTRY_CODES
from ..errors import RulebookError
from .features import feature_info

__all__ = [
    "CLASS_CODES",
    "Rule",
    "Subtype",
    "ClassRules",
    "Rulebook",
    "load_rulebook",
    "parse_rulebook",
    "shipped_rulebook_path",
    "user_rulebook_path",
]

#: Class codes the rulebook may use: the registry's (``core.classes``).
CLASS_CODES = _REGISTRY_CODES

_RULE_KEYS = {"range", "margin", "weight", "source", "says", "required", "gate"}
_RULE_REQUIRED = ("range", "margin", "weight", "source")
_SUBTYPE_KEYS = {"feature", "range", "source"}
_CLASS_KEYS = {"label", "eclipsing", "score", "subtype", "double_when"}
_SCORING_DEFAULTS = {"missing_penalty": 0.15, "two_minima_weight": 0.5}


@dataclass(frozen=True)
class Rule:
    """A range on one feature, with its weight, soft margin and source."""

    feature: str
    low: float
    high: float
    margin: float
    weight: float
    source: str
    says: str = ""
    line: int = 0
    required: bool = False
    gate: bool = False

    def membership(self, value: float) -> float:
        """1 inside ``[low, high]``, falling linearly to 0 one margin outside."""
        if self.low <= value <= self.high:
            return 1.0
        distance = self.low - value if value < self.low else value - self.high
        return max(0.0, 1.0 - distance / self.margin)

    def range_text(self) -> str:
        """The range in words, e.g. ``0.45–1.0``, ``above 0.3``, ``below 0.01``."""
        if math.isinf(self.high):
            return f"above {self.low:g}"
        if math.isinf(self.low):
            return f"below {self.high:g}"
        return f"{self.low:g}–{self.high:g}"


@dataclass(frozen=True)
class Subtype:
    """A named subtype chosen by one feature's range (e.g. W Vir by period)."""

    name: str
    feature: str
    low: float
    high: float
    source: str


@dataclass(frozen=True)
class ClassRules:
    """All rules of one class."""

    code: str
    label: str
    rules: tuple[Rule, ...]
    subtypes: tuple[Subtype, ...] = ()
    eclipsing: bool = False
    fixed_score: float | None = None
    double_when: str = "two_minima"


#: Values of a class's ``double_when``.
DOUBLE_WHEN = ("two_minima", "unequal")


@dataclass(frozen=True)
class Rulebook:
    """A checked rulebook: classes with their rules, and scoring settings."""

    classes: tuple[ClassRules, ...]
    missing_penalty: float
    two_minima_weight: float
    path: str

    def get(self, code: str) -> ClassRules:
        """The rules of class ``code``."""
        for entry in self.classes:
            if entry.code == code:
                return entry
        raise KeyError(code)

    @property
    def codes(self) -> tuple[str, ...]:
        return tuple(entry.code for entry in self.classes)


def shipped_rulebook_path() -> Path:
    """The rulebook shipped with Phasewise (a package resource of ``phasewise.core.classify``)."""
    return Path(str(resources.files(__package__).joinpath("rulebook.toml")))


def user_rulebook_path() -> Path:
    """Where a user's own rulebook is looked for (it need not exist)."""
    base = os.environ.get("XDG_CONFIG_HOME") or os.path.join(os.path.expanduser("~"), ".config")
    return Path(base) / "phasewise" / "rulebook.toml"


def load_rulebook(path: str | os.PathLike | None = None) -> Rulebook:
    """Read and check a rulebook.

    Parameters
    ----------
    path : path, optional
        A rulebook file.  When omitted, the user copy at
        :func:`user_rulebook_path` is used if it exists, else the shipped one.

    Raises
    ------
    RulebookError
        The file is missing, is not TOML, or breaks a rule of the layout; the
        message names the file and the line.
    """
    if path is None:
        user = user_rulebook_path()
        path = user if user.is_file() else shipped_rulebook_path()
    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8")
    except OSError as exc:
        raise RulebookError(f"cannot read the rulebook: {exc.strerror}", file=str(path)) from None
    return parse_rulebook(text, name=str(path))


# --------------------------------------------------------------------- lines


_HEADER_RE = re.compile(r"^\s*\[(?!\[)\s*(.+?)\s*\]\s*(#.*)?$")


def _split_dotted(key: str) -> tuple[str, ...]:
    parts, buf, quote = [], "", None
    for char in key:
        if quote:
            if char == quote:
                quote = None
            else:
                buf += char
        elif char in "\"'":
            quote = char
        elif char == ".":
            parts.append(buf.strip())
            buf = ""
        else:
            buf += char
    parts.append(buf.strip())
    return tuple(parts)


class _Lines:
    """Finds the line of a table or of a key inside a table in the TOML text."""

    def __init__(self, text: str) -> None:
        self.lines = text.splitlines()
        self.headers: list[tuple[int, tuple[str, ...]]] = []
        for number, line in enumerate(self.lines, start=1):
            match = _HEADER_RE.match(line)
            if match:
                self.headers.append((number, _split_dotted(match.group(1))))

    def table(self, path: tuple[str, ...]) -> int:
        for number, header in self.headers:
            if header == path:
                return number
        for number, header in self.headers:  # implicitly defined by a sub-table
            if header[: len(path)] == path:
                return number
        return 0

    def key(self, path: tuple[str, ...], key: str) -> int:
        start = self.table(path)
        if start == 0:
            return 0
        pattern = re.compile(
            rf"^\s*(?:{re.escape(key)}|\"{re.escape(key)}\"|'{re.escape(key)}')\s*="
        )
        ends = [n for n, _ in self.headers if n > start]
        end = ends[0] if ends else len(self.lines) + 1
        for number in range(start + 1, end):
            if pattern.match(self.lines[number - 1]):
                return number
        return start


# ------------------------------------------------------------------- parsing


def _table_name(path: tuple[str, ...]) -> str:
    return "[" + ".".join(p if re.fullmatch(r"[A-Za-z0-9_-]+", p) else f'"{p}"' for p in path) + "]"


def parse_rulebook(text: str, name: str = "<rulebook>") -> Rulebook:
    """Check the TOML ``text`` of a rulebook; ``name`` is used in messages."""
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise RulebookError(f"not valid TOML: {exc}", file=name) from None
    lines = _Lines(text)

    def fail(line: int, message: str) -> RulebookError:
        where = f"line {line}: " if line else ""
        return RulebookError(where + message, file=name)

    for key in data:
        if key not in ("scoring", "class", "about"):
            raise fail(
                lines.table((key,)) or lines.key((), key),
                f"unknown top-level table {key!r}; expected 'scoring', 'class' or 'about'",
            )
    scoring = dict(_SCORING_DEFAULTS)
    for key, value in data.get("scoring", {}).items():
        line = lines.key(("scoring",), key)
        if key not in _SCORING_DEFAULTS:
            raise fail(line, f"[scoring] unknown key {key!r}; expected one of {sorted(scoring)}")
        scoring[key] = _number(value, 0.0, 1.0, line, f"[scoring] {key}", fail)

    classes_data = data.get("class")
    if not isinstance(classes_data, dict) or not classes_data:
        raise fail(0, "no [class.<code>] tables found")
    classes = tuple(_parse_class(code, body, lines, fail) for code, body in classes_data.items())
    return Rulebook(
        classes=classes,
        missing_penalty=scoring["missing_penalty"],
        two_minima_weight=scoring["two_minima_weight"],
        path=name,
    )


def _number(value: Any, low: float | None, high: float | None, line: int, what: str, fail) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)) or math.isnan(value):
        raise fail(line, f"{what}: expected a number, got {value!r}")
    if (low is not None and value < low) or (high is not None and value > high):
        raise fail(line, f"{what}: {value!r} is outside [{low}, {high}]")
    return float(value)


def _range(value: Any, line: int, what: str, fail) -> tuple[float, float]:
    if not isinstance(value, list) or len(value) != 2:
        raise fail(line, f"{what} range: expected [low, high], got {value!r}")
    low = _number(value[0], None, None, line, f"{what} range", fail)
    high = _number(value[1], None, None, line, f"{what} range", fail)
    if low > high:
        raise fail(
            line, f"{what} range: reversed range [{value[0]}, {value[1]}]; low must be <= high"
        )
    return low, high


def _parse_class(code: str, body: Any, lines: _Lines, fail) -> ClassRules:
    path = ("class", code)
    line = lines.table(path)
    if code not in CLASS_CODES:
        raise fail(line, f"unknown class code {code!r}; expected one of {', '.join(CLASS_CODES)}")
    if not isinstance(body, dict):
        raise fail(line, f"{_table_name(path)}: expected a table")
    label, eclipsing, fixed_score, double_when = code, False, None, "two_minima"
    rules: list[Rule] = []
    subtypes: tuple[Subtype, ...] = ()
    for key, value in body.items():
        key_line = lines.key(path, key)
        if key == "label":
            if not isinstance(value, str):
                raise fail(key_line, f"{_table_name(path)} label: expected text, got {value!r}")
            label = value
        elif key == "eclipsing":
            if not isinstance(value, bool):
                raise fail(
                    key_line,
                    f"{_table_name(path)} eclipsing: expected true or false, got {value!r}",
                )
            eclipsing = value
        elif key == "double_when":
            if value not in DOUBLE_WHEN:
                raise fail(
                    key_line,
                    f"{_table_name(path)} double_when: expected one of "
                    f"{', '.join(DOUBLE_WHEN)}, got {value!r}",
                )
            double_when = value
        elif key == "score":
            fixed_score = _number(value, 0.0, 1.0, key_line, f"{_table_name(path)} score", fail)
        elif key == "subtype":
            subtypes = _parse_subtypes(path, value, lines, fail)
        elif isinstance(value, dict):
            rules.append(_parse_rule(path, key, value, lines, fail))
        else:
            raise fail(
                key_line,
                f"{_table_name(path)}: unknown key {key!r}; expected {sorted(_CLASS_KEYS)} "
                "or a [class.CODE.<feature>] rule table",
            )
    if not rules and fixed_score is None:
        raise fail(line, f"{_table_name(path)}: no rules and no fixed score")
    return ClassRules(code, label, tuple(rules), subtypes, eclipsing, fixed_score, double_when)


def _check_feature(feature: Any, line: int, what: str, fail) -> str:
    info = feature_info(feature) if isinstance(feature, str) else None
    if info is None:
        raise fail(line, f"{what}: unknown feature {feature!r} (see core.classify.FEATURES)")
    if not info.numeric:
        raise fail(line, f"{what}: feature {feature!r} is not a number and cannot have a range")
    return feature


def _parse_rule(path: tuple[str, ...], feature: str, body: dict, lines: _Lines, fail) -> Rule:
    rule_path = (*path, feature)
    what = _table_name(rule_path)
    line = lines.table(rule_path)
    _check_feature(feature, line, what, fail)
    for key in body:
        if key not in _RULE_KEYS:
            raise fail(
                lines.key(rule_path, key),
                f"{what}: unknown key {key!r}; expected {sorted(_RULE_KEYS)}",
            )
    for key in _RULE_REQUIRED:
        if key not in body:
            raise fail(line, f"{what}: missing key {key!r}")
    low, high = _range(body["range"], lines.key(rule_path, "range"), what, fail)
    margin = _number(
        body["margin"], 0.0, None, lines.key(rule_path, "margin"), f"{what} margin", fail
    )
    weight = _number(
        body["weight"], 0.0, None, lines.key(rule_path, "weight"), f"{what} weight", fail
    )
    if margin <= 0 or weight <= 0:
        bad = "margin" if margin <= 0 else "weight"
        raise fail(lines.key(rule_path, bad), f"{what} {bad}: must be > 0")
    texts = {}
    for key in ("source", "says"):
        value = body.get(key, "")
        if not isinstance(value, str) or (key == "source" and not value.strip()):
            raise fail(
                lines.key(rule_path, key), f"{what} {key}: expected non-empty text, got {value!r}"
            )
        texts[key] = value
    flags = {}
    for key in ("required", "gate"):
        flags[key] = body.get(key, False)
        if not isinstance(flags[key], bool):
            raise fail(
                lines.key(rule_path, key),
                f"{what} {key}: expected true or false, got {flags[key]!r}",
            )
    return Rule(
        feature, low, high, margin, weight, texts["source"], texts["says"], line,
        flags["required"], flags["gate"],
    )  # fmt: skip


def _parse_subtypes(path: tuple[str, ...], body: Any, lines: _Lines, fail) -> tuple[Subtype, ...]:
    sub_path = (*path, "subtype")
    if not isinstance(body, dict):
        raise fail(lines.key(path, "subtype"), f"{_table_name(sub_path)}: expected tables")
    subtypes = []
    for name, entry in body.items():
        entry_path = (*sub_path, name)
        what = _table_name(entry_path)
        line = lines.table(entry_path)
        if not isinstance(entry, dict):
            raise fail(line, f"{what}: expected a table")
        for key in entry:
            if key not in _SUBTYPE_KEYS:
                raise fail(
                    lines.key(entry_path, key),
                    f"{what}: unknown key {key!r}; expected {sorted(_SUBTYPE_KEYS)}",
                )
        for key in sorted(_SUBTYPE_KEYS):
            if key not in entry:
                raise fail(line, f"{what}: missing key {key!r}")
        feature = _check_feature(entry["feature"], lines.key(entry_path, "feature"), what, fail)
        low, high = _range(entry["range"], lines.key(entry_path, "range"), what, fail)
        source = entry["source"]
        if not isinstance(source, str) or not source.strip():
            raise fail(lines.key(entry_path, "source"), f"{what} source: expected non-empty text")
        subtypes.append(Subtype(name, feature, low, high, source))
    return tuple(subtypes)
