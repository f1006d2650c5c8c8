"""The desk model (core.desk) over a real seeded ledger, without Qt."""

from __future__ import annotations

import numpy as np
import pytest

from phasewise.core.analysis import AnalysisSettings, analyse
from phasewise.core.desk import DeskLedger, DeskModel, StarAnalyser
from phasewise.core.errors import PhasewiseError
from phasewise.core.ledger import Ledger
from phasewise.core.synthetic import make_survey

EVENTS = ("ledger", "star", "lightcurve", "verdict", "rows", "history", "settings", "change")


@pytest.fixture(scope="module")
def seeded(tmp_path_factory):
    """Twelve seeded survey stars analysed by core.analysis, in a ledger file."""
    survey = make_survey(12, seed=41)
    settings = AnalysisSettings()
    path = tmp_path_factory.mktemp("desk") / "seeded.ledger.sqlite"
    ledger = Ledger.create(path)
    ledger.set_analysis_settings(settings.to_dict(), settings.hash)
    ledger.add_stars(survey.lightcurves, source_file="seeded")
    ledger.store_results(
        [(lc.star_id, settings.hash, analyse(lc, settings).to_dict()) for lc in survey.lightcurves]
    )
    ledger.close()
    truth = {lc.star_id: s.truth for lc, s in zip(survey.lightcurves, survey.stars, strict=True)}
    return path, truth


@pytest.fixture
def model(seeded, tmp_path):
    import shutil

    path = tmp_path / "field.ledger.sqlite"
    shutil.copy(seeded[0], path)
    model = DeskModel(Ledger.open(path))
    model.events = []
    for name in EVENTS:
        model.subscribe(name, lambda *args, name=name: model.events.append((name, *args)))
    yield model
    if model.ledger is not None:
        model.close_ledger()


def _periodic_star(model, seeded):
    """A star whose top suggestion is periodic and has a period (the analysis decides)."""
    for star_id in model.star_ids():
        model.load_star(star_id)
        if model.suggested_period() and model.suggested_class() not in ("CONST",):
            return star_id
    raise AssertionError("no periodic star among the seeded ones")


def test_the_ledger_is_a_desk_ledger(model):
    assert isinstance(model.ledger, DeskLedger)


def test_load_star_shows_the_analysed_period_and_caches(model):
    star_id = model.star_ids()[0]
    model.events.clear()
    model.load_star(star_id)
    stored = model.ledger.result(star_id).result
    assert model.session.period == pytest.approx(
        stored["period"] or stored["candidates"][0]["period"]
    )
    assert model.result == stored
    assert ("star", star_id) in model.events
    assert model.star_data(star_id) is model.data  # cached: the same object again


def test_verdict_policy_confirm_nudged_and_constant(model, seeded):
    star_id = _periodic_star(model, seeded)
    plan = model.plan_verdict("confirmed")
    # the suggestion's own period (e.g. 2P for an eclipsing binary) when nothing was nudged
    assert plan.class_code == model.suggested_class()
    assert plan.period == pytest.approx(model.suggested_period())
    model.session.nudge(+1)
    assert model.plan_verdict("confirmed").period == pytest.approx(model.session.period)
    assert model.plan_verdict("relabelled", "CONST").period is None  # a constant has no period
    with pytest.raises(PhasewiseError, match="unknown class"):
        model.plan_verdict("relabelled", "NOPE")
    model.session.reset_period()
    assert model.plan_verdict("rejected").period == pytest.approx(model.session.period)
    assert model.star_id == star_id


def test_record_verdict_reaches_views_through_the_ledger_event(model, seeded):
    star_id = _periodic_star(model, seeded)
    model.events.clear()
    model.session.nudge(+1)
    nudged = model.session.period
    model.record_verdict("confirmed", note="clean")
    stored = model.ledger.verdict(star_id)
    assert (stored.status, stored.class_code) == ("confirmed", model.suggested_class())
    assert stored.period == pytest.approx(nudged)
    assert stored.final is not None  # the final numbers were stored with it
    names = [e[0] for e in model.events]
    assert ("rows", (star_id,)) in model.events and ("verdict", star_id) in model.events
    assert names[-1] == "change" and "history" in names
    assert model.verdict.status == "confirmed"  # the current star's verdict re-read
    assert model.session.period == nudged  # a verdict does not reset the trial period
    assert model.undo_labels()[0]


def test_exclusion_keeps_the_trial_period_and_undo_reloads(model, seeded):
    star_id = _periodic_star(model, seeded)
    model.session.nudge(+3)
    trial = model.session.period
    model.events.clear()
    model.set_excluded([0, 1, 2], True)
    assert model.lc.excluded[:3].all() and model.data.stale
    assert ("lightcurve", star_id) in model.events
    assert model.session.period == trial
    model.events.clear()
    model.undo()
    assert not model.lc.excluded[:3].any()
    assert ("star", star_id) in model.events  # reloaded from the ledger


def test_a_write_by_other_code_updates_the_current_star(model, seeded):
    star_id = model.star_ids()[0]
    model.load_star(star_id)
    settings = model.analysis_settings()
    changed = dict(model.result, period=1.2345678, candidates=[])
    model.events.clear()
    model.ledger.store_results([(star_id, settings.hash, changed)])  # not through the model
    assert model.result["period"] == pytest.approx(1.2345678)
    assert model.session.period == pytest.approx(1.2345678)
    assert ("rows", (star_id,)) in model.events and ("star", star_id) in model.events


def test_read_only_ledger_records_nothing(seeded):
    model = DeskModel(Ledger.open(seeded[0], readonly=True))
    try:
        model.load_star(model.star_ids()[0])
        assert model.read_only
        with pytest.raises(PhasewiseError, match="read-only"):
            model.record_verdict("rejected")
    finally:
        model.close_ledger()


def test_fold_model_is_cached_per_period(model):
    model.load_star(model.star_ids()[0])
    if model.session.period is None:
        pytest.skip("first seeded star has no period")
    band = model.primary_band()
    first = model.fold_model(model.lc, model.session.period, model.settings, band)
    assert model.fold_model(model.lc, model.session.period, model.settings, band) is first


def test_batch_run_hand_over_and_take_back(model, seeded):
    from phasewise.core.batch import analyse_ledger

    star_id = model.star_ids()[0]
    model.load_star(star_id)
    model.ledger.set_excluded(star_id, np.eye(1, model.lc.n_points, 0, dtype=bool)[0])
    path, todo = model.hand_over("stale")
    assert todo == [star_id] and model.read_only and model.star_id == star_id
    summary = analyse_ledger(path, model.settings, workers=0, only="stale")
    assert summary.analysed == 1
    model.events.clear()
    model.take_back(path, todo)
    assert not model.read_only and not model.data.stale
    assert ("rows", (star_id,)) in model.events and ("star", star_id) in model.events


@pytest.mark.slow
def test_star_analyser_runs_the_batch_worker_function_in_a_process(model):
    star_id = model.star_ids()[0]
    lc = model.ledger.lightcurve(star_id)
    analyser = StarAnalyser()
    try:
        outcome = analyser.analyse(lc, model.analysis_settings())
    finally:
        analyser.close()
    assert outcome.star_id == star_id and not outcome.failed
    # the same numbers as in this process (deterministic analysis)
    assert outcome.result["period"] == pytest.approx(model.ledger.result(star_id).result["period"])


def abort_in_compiled_code(lc, settings, periodogram=None):
    """Stands for an analysis that aborts in native code (the worker process dies)."""
    import os

    os.abort()


@pytest.mark.slow
def test_a_star_that_kills_its_worker_is_recorded_failed_and_the_next_one_runs(model):
    star_id = model.star_ids()[0]
    lc = model.ledger.lightcurve(star_id)
    analyser = StarAnalyser(f"{__name__}:abort_in_compiled_code")
    try:
        outcome = analyser.analyse(lc, model.analysis_settings())
        assert outcome.failed and outcome.error == StarAnalyser.LOST  # this process lives on
        model.store_outcomes([outcome])
        assert model.ledger.result(star_id).failed
        analyser.analyse_fn = None  # the real analysis, in a fresh worker process
        assert not analyser.analyse(lc, model.analysis_settings()).failed
    finally:
        analyser.close()
