"""core.batch: the parent loop, workers, failures, stop and resume.

The orchestration tests use the stand-in analysis functions of
``tests/core/batch_helpers.py`` (fast and explicit); the shared-epoch tests
run the real analysis and periodogram.
"""

from __future__ import annotations

import math
import sys
import threading

import numpy as np
import pytest

from phasewise.core.analysis import AnalysisSettings, analyse
from phasewise.core.batch import (
    BatchSummary,
    Progress,
    analyse_chunk,
    analyse_ledger,
    shared_epoch_groups,
)
from phasewise.core.clean import clean
from phasewise.core.errors import PhasewiseError
from phasewise.core.ledger import Ledger
from phasewise.core.lightcurve import LightCurve
from phasewise.core.periodogram import PeriodogramSettings, compute_periodogram
from phasewise.core.synthetic import synthetic_field

QUICK = "tests.core.batch_helpers:quick_analyse"
RAISING = "tests.core.batch_helpers:raising_analyse"
FAILING = "tests.core.batch_helpers:failing_status_analyse"
DYING = "tests.core.batch_helpers:dying_analyse"
DIVIDING = "tests.core.batch_helpers:dividing_analyse"

#: A small grid keeps the real analysis quick in tests (about 13,000 frequencies).
FAST = AnalysisSettings(periodogram=PeriodogramSettings(fmax=3.0, oversampling=3))


def assert_same(a, b, path="result", rtol=1e-9):
    """Equal structures; floats equal to ``rtol`` (order of summation may differ)."""
    if isinstance(a, dict):
        assert isinstance(b, dict) and a.keys() == b.keys(), path
        for key in a:
            assert_same(a[key], b[key], f"{path}.{key}", rtol)
    elif isinstance(a, (list, tuple)):
        assert isinstance(b, (list, tuple)) and len(a) == len(b), path
        for i, (x, y) in enumerate(zip(a, b, strict=True)):
            assert_same(x, y, f"{path}[{i}]", rtol)
    elif isinstance(a, float) and isinstance(b, float):
        assert math.isclose(a, b, rel_tol=rtol, abs_tol=1e-300) or (
            math.isnan(a) and math.isnan(b)
        ), f"{path}: {a!r} != {b!r}"
    else:
        assert a == b, f"{path}: {a!r} != {b!r}"


@pytest.fixture(scope="module")
def field():
    return synthetic_field(8, n_epochs=150, seed=11)


def make_ledger(path, lightcurves):
    with Ledger.create(path) as ledger:
        ledger.add_stars(lightcurves)
    return path


@pytest.fixture
def quick_ledger(tmp_path):
    lcs = synthetic_field(23, n_epochs=60, seed=5).lightcurves()
    return make_ledger(tmp_path / "quick.ledger.sqlite", lcs)


# ------------------------------------------------------------ shared epochs
def test_shared_epoch_groups_place_each_star_on_the_common_epochs(field):
    lcs = field.lightcurves()
    groups = shared_epoch_groups(lcs, FAST)
    grouped = [i for g in groups for i in g.members]
    assert len(grouped) == len(set(grouped)) >= 5  # most stars share the field's grid
    for group in groups:
        assert group.mag.shape == (len(group.members), group.time.size)
        for row, index in enumerate(group.members):
            cleaned, _ = clean(lcs[index], FAST.clean)
            t, m, _ = cleaned.arrays()
            have = np.isfinite(group.mag[row])
            # exactly the star's good points, at their own epochs; the rest missing
            assert have.sum() == t.size
            np.testing.assert_array_equal(group.time[have], np.sort(t))
            np.testing.assert_array_equal(group.mag[row][have], m[np.argsort(t)])


def test_shared_periodograms_equal_star_by_star(field):
    from phasewise.core.periodogram import shared_epoch_periodograms

    lcs = field.lightcurves()
    group = shared_epoch_groups(lcs, FAST)[0]
    batched = shared_epoch_periodograms(
        group.time, group.mag, group.mag_err, FAST.periodogram, frequency=group.frequency
    )
    for index, pgram in zip(group.members, batched, strict=True):
        cleaned, _ = clean(lcs[index], FAST.clean)
        alone = compute_periodogram(cleaned, FAST.periodogram)
        np.testing.assert_allclose(pgram.frequency, alone.frequency, rtol=1e-12)
        np.testing.assert_allclose(pgram.power, alone.power, rtol=1e-7, atol=1e-9)
        assert pgram.n_points == alone.n_points
        assert pgram.baseline == pytest.approx(alone.baseline, rel=1e-12)


@pytest.mark.slow
def test_chunk_results_equal_star_by_star(field):
    lcs = field.lightcurves()
    outcomes = analyse_chunk(lcs, FAST, shared_epochs=True)
    assert sum(o.shared_epochs for o in outcomes) >= 5
    for lc, outcome in zip(lcs, outcomes, strict=True):
        alone = analyse(lc, FAST).to_dict()
        assert outcome.star_id == lc.star_id and not outcome.failed
        assert_same(outcome.result, alone, path=lc.star_id, rtol=1e-6)


def test_groups_leave_out_what_cannot_share():
    f = synthetic_field(4, n_epochs=80, seed=2)
    lcs = f.lightcurves()
    t, m, e = lcs[0].time, lcs[0].mag, lcs[0].mag_err
    two_band = LightCurve("two-band", t, m, e, band=np.where(np.arange(t.size) % 2, "V", "I"))
    shorter = LightCurve("shorter", t[5:], m[5:], e[5:], "V")  # another baseline, another grid
    groups = shared_epoch_groups([*lcs, two_band, shorter], FAST)
    grouped = {i for g in groups for i in g.members}
    assert 4 not in grouped and 5 not in grouped
    pdm = AnalysisSettings(periodogram=PeriodogramSettings(method="pdm", fmax=3.0))
    assert shared_epoch_groups(lcs, pdm) == []


# ------------------------------------------------------------ the ledger run
@pytest.mark.slow  # spawns worker processes
def test_run_stores_every_star_then_resumes_with_nothing(quick_ledger, monkeypatch):
    seen: list[Progress] = []
    reads = []
    read = Ledger.lightcurve

    def counted(self, star_id):
        reads.append(star_id)
        return read(self, star_id)

    def note(progress):
        # memory stays bounded: at most 2 chunks per worker read and not yet written
        assert len(reads) - progress.done <= 4 * 2 * 2
        seen.append(progress)

    monkeypatch.setattr(Ledger, "lightcurve", counted)
    summary = analyse_ledger(
        quick_ledger, FAST, workers=2, analyse_fn=QUICK, chunk_size=4, progress=note
    )
    assert sorted(reads) == sorted(set(reads))  # each star read once
    monkeypatch.undo()
    assert isinstance(summary, BatchSummary)
    assert (summary.total, summary.analysed, summary.failed, summary.skipped) == (23, 23, 0, 0)
    assert summary.engine == "local" and summary.workers == 2 and summary.remaining == 0
    assert [p.done for p in seen] == sorted(p.done for p in seen)
    assert seen[-1].done == seen[-1].total == 23 and seen[-1].rate > 0 and seen[-1].eta == 0
    with Ledger.open(quick_ledger, readonly=True) as ledger:
        assert ledger.settings_hash == FAST.hash
        for star_id in ledger.star_ids():
            stored = ledger.result(star_id)
            assert stored.settings_hash == FAST.hash and not stored.stale
            lc = ledger.lightcurve(star_id)
            assert stored.result["n_good"] == lc.n_good
        assert ledger.stars_needing_analysis(FAST.hash, "stale") == []
    again = analyse_ledger(quick_ledger, FAST, workers=2, analyse_fn=QUICK)
    assert (again.total, again.analysed, again.skipped) == (0, 0, 23)
    everything = analyse_ledger(quick_ledger, FAST, workers=0, analyse_fn=QUICK, only="all")
    assert (everything.total, everything.analysed, everything.skipped) == (23, 23, 0)


def test_new_settings_make_results_stale_and_stale_run_redoes_them(quick_ledger):
    analyse_ledger(quick_ledger, FAST, workers=0, analyse_fn=QUICK)
    other = AnalysisSettings(fap_threshold=0.01, periodogram=FAST.periodogram)
    assert other.hash != FAST.hash
    none_new = analyse_ledger(quick_ledger, other, workers=0, analyse_fn=QUICK)
    assert none_new.total == 0  # "unanalysed" takes only stars without any result
    assert none_new.stale_left == 23
    stale = analyse_ledger(quick_ledger, other, workers=0, analyse_fn=QUICK, only="stale")
    assert stale.analysed == 23 and stale.stale_left == 0
    with Ledger.open(quick_ledger, readonly=True) as ledger:
        assert {ledger.result(s).settings_hash for s in ledger.star_ids()} == {other.hash}


def test_settings_default_to_the_ledgers_own(quick_ledger):
    analyse_ledger(quick_ledger, FAST, workers=0, analyse_fn=QUICK, only="all")
    summary = analyse_ledger(quick_ledger, workers=0, analyse_fn=QUICK, only="stale")
    assert summary.settings_hash == FAST.hash and summary.total == 0


@pytest.mark.slow  # spawns a worker process
def test_star_that_raises_in_a_worker_is_recorded_and_the_run_goes_on(quick_ledger):
    summary = analyse_ledger(quick_ledger, FAST, workers=1, analyse_fn=RAISING, chunk_size=5)
    with Ledger.open(quick_ledger, readonly=True) as ledger:
        bad = [s for s in ledger.star_ids() if s.endswith("3")]
        assert bad and summary.failed == len(bad) and summary.analysed == 23 - len(bad)
        for star_id in ledger.star_ids():
            stored = ledger.result(star_id)
            if star_id in bad:
                # our sentence for the person; the raw text only in the debug field
                assert stored.failed and "injected" not in stored.error
                assert "unexpected error (RuntimeError)" in stored.error
                assert f"RuntimeError: injected failure for {star_id}" in stored.error_detail
                assert "batch_helpers.py" in stored.error_detail  # where the bug is
            else:
                assert not stored.failed and stored.result["status"] == "ok"
    assert dict(summary.failures).keys() == set(bad)


@pytest.mark.slow  # restarts worker processes
def test_star_that_kills_its_worker_is_isolated_and_recorded(quick_ledger):
    summary = analyse_ledger(quick_ledger, FAST, workers=1, analyse_fn=DYING, chunk_size=4)
    with Ledger.open(quick_ledger, readonly=True) as ledger:
        bad = [s for s in ledger.star_ids() if s.endswith("7")]
        assert bad and summary.failed == len(bad) and summary.analysed == 23 - len(bad)
        for star_id in bad:
            stored = ledger.result(star_id)
            assert stored.failed and "the process analysing this star stopped" in stored.error
        good = [s for s in ledger.star_ids() if s not in bad]
        assert all(not ledger.result(s).failed for s in good)  # chunk-mates are retried


def test_result_with_failed_status_is_stored_as_a_failure(quick_ledger):
    summary = analyse_ledger(quick_ledger, FAST, workers=0, analyse_fn=FAILING)
    with Ledger.open(quick_ledger, readonly=True) as ledger:
        bad = [s for s in ledger.star_ids() if s.endswith("5")]
        assert summary.failed == len(bad) > 0
        stored = ledger.result(bad[0])
        assert stored.failed and "the curve has no usable band" in stored.error


def test_stop_keeps_what_is_written_and_the_next_run_finishes(quick_ledger):
    stop = threading.Event()

    def halt_after_first(progress):
        if progress.done:
            stop.set()

    first = analyse_ledger(
        quick_ledger,
        FAST,
        workers=0,
        analyse_fn=QUICK,
        chunk_size=3,
        progress=halt_after_first,
        stop=stop,
    )
    assert first.stopped and first.analysed == 3 and first.remaining == 20
    with Ledger.open(quick_ledger, readonly=True) as ledger:
        done_before = {
            s: ledger.result(s).computed_at for s in ledger.star_ids() if ledger.result(s)
        }
    assert len(done_before) == 3
    second = analyse_ledger(quick_ledger, FAST, workers=0, analyse_fn=QUICK, stop=lambda: False)
    assert (second.total, second.analysed, second.skipped) == (20, 20, 3)
    with Ledger.open(quick_ledger, readonly=True) as ledger:
        for star_id, when in done_before.items():
            assert ledger.result(star_id).computed_at == when  # not analysed twice


# ------------------------------------------------------------ refusals
def test_function_that_workers_cannot_import_is_refused(quick_ledger):
    with pytest.raises(PhasewiseError, match="cannot be imported by name"):
        analyse_ledger(quick_ledger, FAST, analyse_fn=lambda lc, s: {})
    with pytest.raises(PhasewiseError, match="cannot import 'no_such_module:fn'"):
        analyse_ledger(quick_ledger, FAST, analyse_fn="no_such_module:fn")


def test_bad_arguments_are_refused(quick_ledger):
    with pytest.raises(PhasewiseError, match="field 'only'.*'fresh'"):
        analyse_ledger(quick_ledger, FAST, only="fresh")
    with pytest.raises(PhasewiseError, match="field 'workers'"):
        analyse_ledger(quick_ledger, FAST, workers=-1, analyse_fn=QUICK)
    with pytest.raises(PhasewiseError, match="field 'chunk_size'"):
        analyse_ledger(quick_ledger, FAST, chunk_size=0)


def test_missing_dask_names_the_extra(quick_ledger, monkeypatch):
    monkeypatch.setitem(sys.modules, "distributed", None)  # as if not installed
    with pytest.raises(PhasewiseError, match=r"pip install phasewise\[dask\]"):
        analyse_ledger(quick_ledger, FAST, scheduler="tcp://127.0.0.1:1", analyse_fn=QUICK)


def test_locked_ledger_is_refused(quick_ledger):
    with Ledger.open(quick_ledger):
        with pytest.raises(PhasewiseError, match="quick.ledger.sqlite"):
            analyse_ledger(quick_ledger, FAST, workers=0, analyse_fn=QUICK)


def test_failure_reasons_are_our_sentences(quick_ledger):
    # an analysis that divides by zero on a star (as 1e308 magnitudes once did):
    # the stored reason is our sentence, the raw text is kept only as detail
    summary = analyse_ledger(quick_ledger, FAST, workers=0, analyse_fn=DIVIDING)
    with Ledger.open(quick_ledger, readonly=True) as ledger:
        bad = [s for s in ledger.star_ids() if s.endswith("2")]
        assert summary.failed == len(bad) > 0
        stored = ledger.result(bad[0])
        assert stored.failed and "overflowed or divided by zero" in stored.error
        assert "division by zero" not in stored.error
        assert "ZeroDivisionError" in stored.error_detail
