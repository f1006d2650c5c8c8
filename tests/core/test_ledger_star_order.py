"""The star list's order and filters in SQL (``Ledger.star_order``) against a Python reference.

The ledger holds seeded stars (``core.synthetic``) analysed by the real
pipeline, copies of them never analysed, one failed analysis and
verdicts of every kind; the reference sorts and filters the ``StarRow``s the
list showed before the order moved into SQL.
"""

from __future__ import annotations

import dataclasses
import json
import math

import pytest

from phasewise.core.analysis import AnalysisSettings, analyse
from phasewise.core.errors import PhasewiseError
from phasewise.core.ledger import STAR_ORDER_FIELDS, Ledger
from phasewise.core.synthetic import make_survey
from phasewise.core.vetting import NON_PERIODIC_CLASSES

SEED = 11


@pytest.fixture(scope="module")
def ledger(tmp_path_factory):
    survey = make_survey(6, seed=SEED)
    settings = AnalysisSettings()
    curves = list(survey.lightcurves)
    ledger = Ledger.create(tmp_path_factory.mktemp("order") / "order.ledger.sqlite")
    ledger.add_stars(curves)
    ledger.set_analysis_settings(settings.to_dict(), settings.hash)
    ledger.store_results(
        [
            (lc.star_id, settings.hash, json.loads(json.dumps(analyse(lc, settings).to_dict())))
            for lc in curves[:5]
        ]
    )
    ledger.add_stars(
        [dataclasses.replace(lc, star_id=f"copy-{lc.star_id.lower()}") for lc in curves[:2]]
    )
    ledger.store_failures([(curves[5].star_id, settings.hash, "the fit did not converge")])
    ids = ledger.star_ids()
    ledger.set_verdict(ids[0], "confirmed")
    ledger.set_verdict(ids[1], "relabelled", class_code="CONST")
    ledger.set_verdict(ids[2], "rejected")
    ledger.set_verdict(ids[3], "relabelled", class_code="RRc", period=0.3123)
    ledger.set_verdict(ids[4], "deferred")
    yield ledger
    ledger.close()


def flags_text(row) -> str:
    """The list's flags text of a row (``app.desk.star_list.row_values``)."""
    flags = ",".join(row.flags)
    prefix = "failed" if row.failed else None if row.analysed else "not analysed"
    return ",".join(p for p in (prefix, flags) if p) if prefix else flags


def listed_period(row):
    if row.status == "rejected":
        return None
    code = row.verdict_class or row.suggested_class
    return None if code in NON_PERIODIC_CLASSES else row.period


def field_value(row, field):
    if field == "period":
        return listed_period(row)
    if field == "flags":
        return flags_text(row)
    return getattr(row, field)


def reference(ledger, sort=None, descending=False, status=None, text=""):
    """What the list showed: Python's sort (missing last, texts lower-cased, ties in import order)."""
    rows = ledger.star_rows()
    if status is not None:
        rows = [r for r in rows if r.status == status]
    needle = text.strip().lower()
    if needle:
        rows = [
            r
            for r in rows
            if needle in r.star_id.lower()
            or needle in (r.suggested_class or "").lower()
            or needle in (r.verdict_class or "").lower()
            or needle in flags_text(r).lower()
        ]
    if sort is not None:
        present = [r for r in rows if not missing(field_value(r, sort))]
        absent = [r for r in rows if missing(field_value(r, sort))]

        def key(r):
            value = field_value(r, sort)
            return value.lower() if isinstance(value, str) else value

        # stable in either direction: equal values keep import order
        present.sort(key=key, reverse=descending)
        rows = present + absent
    return [r.star_id for r in rows]


def missing(value) -> bool:
    return value is None or (isinstance(value, float) and not math.isfinite(value))


def test_the_fixture_holds_every_kind_of_line(ledger):
    rows = ledger.star_rows()
    assert any(r.failed for r in rows) and any(not r.analysed for r in rows)
    assert {r.status for r in rows} >= {"unreviewed", "confirmed", "relabelled", "rejected"}
    assert any(r.period is not None and listed_period(r) is None for r in rows)
    assert any(r.flags for r in rows)


@pytest.mark.parametrize("field", sorted(STAR_ORDER_FIELDS))
@pytest.mark.parametrize("descending", [False, True])
def test_every_sort_matches_the_python_reference(ledger, field, descending):
    got = ledger.star_order(field, descending=descending, no_period=NON_PERIODIC_CLASSES)
    assert got == reference(ledger, field, descending)


@pytest.mark.parametrize(
    "status, text",
    [
        (None, ""),
        ("unreviewed", ""),
        ("relabelled", ""),
        (None, "copy-"),
        (None, "NOT ANALYSED"),
        (None, "failed"),
        (None, "rr"),
        (None, "const"),
        ("unreviewed", "rr"),
        (None, "a,"),  # across the failed prefix and a flag, or inside a flag
    ],
)
def test_filters_match_the_python_reference(ledger, status, text):
    for sort in (None, "period", "fap"):
        got = ledger.star_order(sort, status=status, text=text, no_period=NON_PERIODIC_CLASSES)
        assert got == reference(ledger, sort, status=status, text=text)


def test_a_word_of_the_flags_finds_its_stars(ledger):
    rows = [r for r in ledger.star_rows() if r.flags]
    word = rows[0].flags[0].split()[0]
    assert ledger.star_order(text=word) == reference(ledger, text=word)
    assert rows[0].star_id in ledger.star_order(text=word.upper())


def test_lines_of_chosen_stars_come_in_the_order_asked(ledger):
    ids = ledger.star_order("fap", descending=True)
    assert ledger.star_rows_of(ids) == [ledger.star_row(s) for s in ids]
    assert ledger.star_rows_of([]) == []


def test_an_unknown_sort_field_is_refused(ledger):
    with pytest.raises(PhasewiseError, match="cannot sort the star list by 'colour'"):
        ledger.star_order("colour")
