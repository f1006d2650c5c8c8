"""The rulebook: the shipped copy loads, user copies override, errors name the line."""

from __future__ import annotations

import textwrap

import pytest

from phasewise.core.classify import (
    CLASS_CODES,
    is_known_feature,
    load_rulebook,
    parse_rulebook,
    shipped_rulebook_path,
    user_rulebook_path,
)
from phasewise.core.errors import PhasewiseError, RulebookError

GOOD = textwrap.dedent(
    """\
    [scoring]
    missing_penalty = 0.2

    [class.RRab]
    label = "fundamental-mode RR Lyrae"

    [class.RRab.period]
    range = [0.45, 1.0]
    margin = 0.05
    weight = 3.0
    source = "common practice, no source"

    [class.UNKNOWN]
    score = 0.4
    """
)


def _line_of(text: str, needle: str) -> int:
    """1-based line of the first line containing ``needle``."""
    for number, line in enumerate(text.splitlines(), start=1):
        if needle in line:
            return number
    raise AssertionError(needle)


def test_shipped_rulebook_has_every_class_and_sources():
    book = load_rulebook(shipped_rulebook_path())
    assert set(book.codes) == set(CLASS_CODES)
    for entry in book.classes:
        for rule in entry.rules:
            assert rule.source.strip(), (entry.code, rule.feature)
            assert is_known_feature(rule.feature)
            assert rule.low <= rule.high and rule.margin > 0 and rule.weight > 0
    t2 = book.get("T2CEP")
    # Matsunaga, Feast & Menzies 2009: BL Her < 4 d, W Vir 4-20 d, RV Tau > 20 d.
    bounds = {s.name: (s.low, s.high) for s in t2.subtypes}
    assert bounds["BL Her"][1] == 4.0 and bounds["W Vir"] == (4.0, 20.0)
    assert bounds["RV Tau"][0] == 20.0
    # Poro et al. 2024: HADS above 0.3 mag.
    assert {s.name: s.low for s in book.get("DSCT").subtypes}["HADS"] == 0.3


def test_shipped_rulebook_has_no_code():
    text = shipped_rulebook_path().read_text()
    for word in ("eval(", "exec(", "import ", "lambda"):
        assert word not in text


def test_good_rulebook_parses():
    book = parse_rulebook(GOOD, name="mine.toml")
    assert book.codes == ("RRab", "UNKNOWN")
    assert book.missing_penalty == 0.2
    rule = book.get("RRab").rules[0]
    assert (rule.feature, rule.low, rule.high, rule.line) == ("period", 0.45, 1.0, 7)


def test_user_copy_overrides_shipped(tmp_path, monkeypatch):
    monkeypatch.setenv("XDG_CONFIG_HOME", str(tmp_path))
    assert user_rulebook_path() == tmp_path / "phasewise" / "rulebook.toml"
    assert "DSCT" in load_rulebook().codes  # no user copy: the shipped one
    user_rulebook_path().parent.mkdir(parents=True)
    user_rulebook_path().write_text(GOOD)
    assert load_rulebook().codes == ("RRab", "UNKNOWN")
    other = tmp_path / "other.toml"
    other.write_text(GOOD.replace("0.45, 1.0", "0.4, 1.1"))
    assert load_rulebook(other).get("RRab").rules[0].low == 0.4


@pytest.mark.parametrize(
    ("old", "new", "message"),
    [
        ("[class.RRab.period]", "[class.RRab.periodd]", "unknown feature 'periodd'"),
        ("range = [0.45, 1.0]", "range = [1.0, 0.45]", "reversed range"),
        ("margin = 0.05", 'margin = "wide"', "expected a number"),
        ("weight = 3.0", "weight = true", "expected a number"),
        ("range = [0.45, 1.0]", "range = [0.45]", r"expected \[low, high\]"),
        ("[class.RRab]", "[class.RRx]", "unknown class code 'RRx'"),
        ('label = "fundamental-mode RR Lyrae"', "colour = 3", "unknown key 'colour'"),
        ("[scoring]\nmissing_penalty = 0.2", "[scoring]\nmissing_penalty = 2.0", "outside"),
        ("weight = 3.0", "weight = 3.0\nsays = 3", "says: expected non-empty text"),
    ],
)
def test_errors_name_the_line(old, new, message):
    text = GOOD.replace(old, new)
    assert text != GOOD
    changed = [
        n
        for n, (a, b) in enumerate(zip(GOOD.splitlines(), text.splitlines(), strict=False), 1)
        if a != b
    ]
    line = changed[0] if changed else len(GOOD.splitlines()) + 1
    if "says = 3" in new:
        line = _line_of(text, "says = 3")
    if "missing_penalty = 2.0" in new:
        line = _line_of(text, "missing_penalty")
    with pytest.raises(RulebookError, match=rf"^mine\.toml: line {line}: .*{message}"):
        parse_rulebook(text, name="mine.toml")


def test_missing_key_names_the_table_line():
    text = GOOD.replace('source = "common practice, no source"\n', "")
    with pytest.raises(
        RulebookError, match=r"line 7: \[class\.RRab\.period\]: missing key 'source'"
    ):
        parse_rulebook(text, name="mine.toml")


def test_line_is_found_inside_its_own_table():
    # Two tables with a 'range' key: the error must point at the second one.
    text = GOOD.replace(
        "[class.UNKNOWN]",
        '[class.RRc.period]\nrange = [0.45, 0.2]\nmargin = 0.04\nweight = 1.0\nsource = "x"\n\n'
        "[class.UNKNOWN]",
    )
    line = _line_of(text, "range = [0.45, 0.2]")
    assert line > _line_of(text, "range = [0.45, 1.0]")
    with pytest.raises(
        RulebookError, match=rf"line {line}: \[class\.RRc\.period\] range: reversed"
    ):
        parse_rulebook(text, name="mine.toml")


def test_quoted_class_code_line():
    text = GOOD.replace(
        "[class.UNKNOWN]", '[class."DCEP(1O)".colour_VX]\nrange = [0, 1]\n\n[class.UNKNOWN]'
    )
    line = _line_of(text, "colour_VX")
    with pytest.raises(RulebookError, match=rf"line {line}: .*unknown feature 'colour_VX'"):
        parse_rulebook(text, name="mine.toml")


def test_text_feature_cannot_have_a_range():
    text = GOOD.replace("[class.RRab.period]", "[class.RRab.primary_band]")
    with pytest.raises(RulebookError, match="line 7: .*'primary_band' is not a number"):
        parse_rulebook(text, name="mine.toml")


def test_not_toml_and_missing_file(tmp_path):
    with pytest.raises(RulebookError, match=r"mine\.toml: not valid TOML: .*line 1"):
        parse_rulebook("[class.RRab\n", name="mine.toml")
    with pytest.raises(PhasewiseError, match="nothere.toml: cannot read the rulebook"):
        load_rulebook(tmp_path / "nothere.toml")


def test_per_band_amplitude_is_a_known_feature():
    text = GOOD.replace("[class.RRab.period]", "[class.RRab.amplitude_R]")
    assert parse_rulebook(text).get("RRab").rules[0].feature == "amplitude_R"


def test_subtype_errors_name_their_line():
    text = shipped_rulebook_path().read_text()
    bad = text.replace("range = [4.0, 20.0]", "range = [20.0, 4.0]")
    line = _line_of(bad, "range = [20.0, 4.0]")
    with pytest.raises(
        RulebookError, match=rf'line {line}: \[class\.T2CEP\.subtype\."W Vir"\] range: reversed'
    ):
        parse_rulebook(bad, name="copy.toml")
    bad = text.replace(
        '[class.LPV.subtype.Mira-like]\nfeature = "amplitude"',
        '[class.LPV.subtype.Mira-like]\nfeature = "amplitud"',
    )
    line = _line_of(bad, 'feature = "amplitud"')
    with pytest.raises(RulebookError, match=rf"line {line}: .*unknown feature 'amplitud'"):
        parse_rulebook(bad, name="copy.toml")
