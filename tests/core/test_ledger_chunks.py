"""The export's batched reads equal the star-by-star reads, damage included.

The ledger holds seeded stars of every class (``core.synthetic.make_survey``)
analysed by ``core.analysis``; most are confirmed as their top suggestion
with the final numbers of their own analysis, the rest stay unreviewed.
"""

import json
import shutil
import sqlite3
from dataclasses import replace

import pytest

from phasewise.core.analysis import AnalysisSettings, analyse
from phasewise.core.errors import LedgerError
from phasewise.core.ledger import Ledger
from phasewise.core.synthetic import make_survey


@pytest.fixture(scope="module")
def seeded(tmp_path_factory):
    path = tmp_path_factory.mktemp("chunks") / "seeded.ledger.sqlite"
    settings = AnalysisSettings()
    survey = make_survey(6, seed=2026)
    with Ledger.create(path) as ledger:
        ledger.add_stars(survey.lightcurves)
        ledger.set_analysis_settings(settings.to_dict(), settings.hash)
        results = {
            lc.star_id: json.loads(json.dumps(analyse(lc, settings).to_dict()))
            for lc in survey.lightcurves
        }
        ledger.store_results([(s, settings.hash, r) for s, r in results.items()])
        confirmed = [
            (
                s,
                "confirmed",
                r["suggestions"][0]["class"],
                r["suggestions"][0]["period"],
                None,
                r["final"],
            )
            for s, r in list(results.items())[:-2]
            if r["suggestions"] and r.get("final")
        ]
        assert len(confirmed) >= 2
        ledger.set_verdicts(confirmed, label="bulk confirm")
    return path


@pytest.fixture
def ledger_path(seeded, tmp_path):
    path = tmp_path / "chunks.ledger.sqlite"
    shutil.copyfile(seeded, path)
    return path


def _change_behind_the_ledger(path, star_id) -> None:
    """Change a verdict's note without its seal (as damage would)."""
    conn = sqlite3.connect(path)
    with conn:
        conn.execute(
            "UPDATE verdicts SET note = 'changed behind the ledger' "
            "WHERE star = (SELECT id FROM stars WHERE star_id = ?)",
            (star_id,),
        )
    conn.close()


def _one_by_one(ledger):
    return [(ledger.verdict(s), ledger.star_info(s)) for s in ledger.star_ids()]


@pytest.mark.parametrize("chunk", [1, 2, 3, 1000])
def test_chunks_equal_single_star_reads(ledger_path, chunk):
    with Ledger.open(ledger_path, readonly=True) as ledger:
        expected = _one_by_one(ledger)
        chunks = list(ledger.verdict_chunks(chunk))
    assert all(0 < len(c) <= chunk for c in chunks)
    assert [pair for c in chunks for pair in c] == expected
    assert sum(v.final is not None for v, _ in expected) >= 2  # finals are really compared


def test_chunk_size_is_checked(ledger_path):
    with (
        Ledger.open(ledger_path, readonly=True) as ledger,
        pytest.raises(LedgerError, match="chunk"),
    ):
        next(ledger.verdict_chunks(0))


def test_damaged_verdict_is_reported_by_both_reads(ledger_path):
    with Ledger.open(ledger_path, readonly=True) as ledger:
        victim = next(v.star_id for v, _ in _one_by_one(ledger) if v.final is not None)
    _change_behind_the_ledger(ledger_path, victim)
    with Ledger.open(ledger_path, readonly=True) as ledger:
        with pytest.raises(LedgerError, match=f"star '{victim}'.*damaged") as single:
            ledger.verdict(victim)
        with pytest.raises(LedgerError, match=f"star '{victim}'.*damaged") as batched:
            for _ in ledger.verdict_chunks(2):
                pass
    assert str(batched.value) == str(single.value)


def test_results_of_equals_single_star_reads(ledger_path):
    with Ledger.open(ledger_path) as ledger:
        ids = ledger.star_ids()
        never = "never-analysed"
        # a star added after the analysis has no result: absent from the mapping
        ledger.add_stars([replace(make_survey(1, seed=7).lightcurves[0], star_id=never)])
        expected = {s: ledger.result(s) for s in ids}
        assert all(r is not None and r.result for r in expected.values())
        assert ledger.results_of([*reversed(ids), never]) == expected
        assert ledger.results_of([]) == {}


def test_damaged_result_is_reported_by_both_reads(ledger_path):
    with Ledger.open(ledger_path, readonly=True) as ledger:
        victim = ledger.star_ids()[1]
    conn = sqlite3.connect(ledger_path)
    with conn:
        conn.execute(
            "UPDATE results SET period = period + 1 "
            "WHERE star = (SELECT id FROM stars WHERE star_id = ?)",
            (victim,),
        )
    conn.close()
    with Ledger.open(ledger_path, readonly=True) as ledger:
        single = ledger.result(victim)
        batched = ledger.results_of(ledger.star_ids())
        assert single.damaged and single.result is None
        assert batched[victim] == single
        assert sum(r.damaged for r in batched.values()) == 1


@pytest.mark.parametrize(("start", "stop"), [(0, None), (0, 2), (2, 5), (4, None), (5, 5), (3, 99)])
def test_slices_of_import_order_equal_slices_of_the_full_reads(ledger_path, start, stop):
    # the export's processes each read one slice (core.export._parallel_spool)
    with Ledger.open(ledger_path, readonly=True) as ledger:
        pairs = _one_by_one(ledger)
        rows = ledger.star_rows()
        sliced = [p for c in ledger.verdict_chunks(2, start=start, stop=stop) for p in c]
        assert sliced == pairs[start:stop]
        assert ledger.star_rows(start, stop) == rows[start:stop]


def test_negative_positions_are_refused(ledger_path):
    with (
        Ledger.open(ledger_path, readonly=True) as ledger,
        pytest.raises(LedgerError, match="positions from 0"),
    ):
        ledger.star_rows(-1, 2)


def test_a_damaged_star_read_by_another_process_is_named(ledger_path, tmp_path, monkeypatch):
    # the export's other processes report a damaged record as this process would
    from phasewise.core import export
    from phasewise.core.errors import PhasewiseError

    with Ledger.open(ledger_path, readonly=True) as ledger:
        ids = ledger.star_ids()
    victim = ids[-1]  # in the last slice: read by another process
    _change_behind_the_ledger(ledger_path, victim)
    monkeypatch.setattr(export, "_processes", lambda n: 2)
    out = tmp_path / "out"
    out.mkdir()
    with (
        Ledger.open(ledger_path, readonly=True) as ledger,
        pytest.raises(PhasewiseError, match=f"star '{victim}'.*damaged"),
    ):
        export.write_catalogue(ledger, out / "v.ecsv", statuses=("unreviewed", "confirmed"))
    assert list(out.iterdir()) == []  # no catalogue, no spool or log left behind


@pytest.mark.skipif(shutil.which("false") is None, reason="needs the 'false' command")
def test_a_process_that_dies_is_reported_and_leaves_nothing(ledger_path, tmp_path, monkeypatch):
    # a child that ends without its reply (killed, out of memory): the export says so
    import sys

    from phasewise.core import export
    from phasewise.core.errors import PhasewiseError

    monkeypatch.setattr(export, "_processes", lambda n: 2)
    monkeypatch.setattr(sys, "executable", shutil.which("false"))  # ends at once, exit code 1
    out = tmp_path / "out"
    out.mkdir()
    with (
        Ledger.open(ledger_path, readonly=True) as ledger,
        pytest.raises(PhasewiseError, match="ended with exit code 1"),
    ):
        export.write_catalogue(ledger, out / "v.ecsv", statuses=("unreviewed", "confirmed"))
    assert list(out.iterdir()) == []


def test_a_process_that_cannot_start_is_reported_and_leaves_nothing(
    ledger_path, tmp_path, monkeypatch
):
    import sys

    from phasewise.core import export
    from phasewise.core.errors import PhasewiseError

    monkeypatch.setattr(export, "_processes", lambda n: 3)
    monkeypatch.setattr(sys, "executable", str(tmp_path / "no-such-python"))
    out = tmp_path / "out"
    out.mkdir()
    with (
        Ledger.open(ledger_path, readonly=True) as ledger,
        pytest.raises(PhasewiseError, match="could not start a process"),
    ):
        export.write_catalogue(ledger, out / "v.ecsv", statuses=("unreviewed", "confirmed"))
    assert list(out.iterdir()) == []
