"""The vetted catalogue agrees with every verdict.

Fixtures are seeded stars analysed by the real pipeline into a real ledger
(``catalogue_fixtures``).  Each verdict kind x class family is recorded as
the command line records it (``core.final.record_verdict``), the catalogue is
built, and each row is checked for consistency: physics of the row's class
only, Fourier terms at the row's period, no period for classes without one,
period errors present, ``period_ratio`` from the exported periods.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from phasewise.core.classes import CLASSES, EPOCH_MAXIMUM, EPOCH_PRIMARY_MINIMUM
from phasewise.core.diagrams import star_point
from phasewise.core.export import catalogue_table
from phasewise.core.final import eclipse_shape, finalise_stars, record_verdict, result_key
from phasewise.core.fourier import fit_fourier
from phasewise.core.physics import RELATIONS
from phasewise.core.results import StarResult

from .catalogue_fixtures import build

PHYSICS_COLUMNS = ("feh_jk", "feh_zw", "feh_c09", "abs_mag", "dist_mod", "distance")


@pytest.fixture(scope="module")
def field(tmp_path_factory):
    ledger, roles, truth = build(tmp_path_factory.mktemp("catalogue") / "c.ledger.sqlite")
    yield ledger, roles, truth
    ledger.close()


def _rows(ledger, statuses=("unreviewed", "confirmed", "relabelled", "rejected", "deferred")):
    table = catalogue_table(ledger, statuses)
    return {str(row["star_id"]): row for row in table}


def _nan(value) -> bool:
    return value is None or (isinstance(value, float | np.floating) and math.isnan(value))


def _analysed(ledger, star):
    return StarResult.from_dict(ledger.result(star).result)


def check_row(row, ledger=None):
    """The consistency every exported row must have, whatever the verdict."""
    code = str(row["class"])
    periodic = code and CLASSES[code].periodic and row["status"] != "rejected"
    if not periodic:
        for name in ("period", "period_err", "epoch", "period2", "period_ratio", "A1", "R21"):
            assert _nan(row[name]), (row["star_id"], name)
        assert row["fourier_order"] == -1 and row["epoch_kind"] == ""
    else:
        assert row["period"] > 0 and row["period_err"] > 0, row["star_id"]
        kind = EPOCH_PRIMARY_MINIMUM if CLASSES[code].eclipsing else EPOCH_MAXIMUM
        assert row["epoch_kind"] == kind
    if not (periodic and CLASSES[code].relations):
        for name in PHYSICS_COLUMNS:
            assert _nan(row[name]), (row["star_id"], name)
    if not _nan(row["period2"]):
        shorter, longer = sorted((row["period"], row["period2"]))
        # documented: shorter over longer, i.e. period2/period or its inverse
        assert row["period_ratio"] == pytest.approx(shorter / longer, rel=1e-12)
    else:
        assert _nan(row["period_ratio"])
    for relation in (row["feh_relation"], row["abs_mag_relation"], row["distance_relation"]):
        for name in RELATIONS:
            if name in str(relation):
                applies = RELATIONS[name].applies_to
                assert code in applies or "*" in applies, (row["star_id"], name)


def test_unreviewed_rows_use_the_top_suggestion(field):
    ledger, roles, truth = field
    rows = _rows(ledger)
    for row in rows.values():
        check_row(row)
    ew = rows[roles["ew"]]
    analysed = _analysed(ledger, roles["ew"]).number("period")
    # the eclipsing binary at its orbital period, twice the Fourier period
    assert ew["period"] == pytest.approx(2 * analysed, rel=1e-12)
    assert ew["period"] == pytest.approx(truth[roles["ew"]].period, rel=1e-3)
    assert ew["period_source"] == "suggestion"
    assert ew["R21"] > 1.0  # two minima per cycle: A2 > A1 at the orbital period
    rrab = rows[roles["rrab"]]
    assert rrab["period_source"] == "analysis" and not _nan(rrab["feh_zw"])


def test_eclipsing_rows_have_primary_minimum_and_depths_from_the_fold(field):
    ledger, roles, truth = field
    rows = _rows(ledger)
    for role in ("ew", "ea"):
        row, star = rows[roles[role]], truth[roles[role]]
        assert row["epoch_kind"] == EPOCH_PRIMARY_MINIMUM
        # the injected epoch is the time of primary minimum (core.synthetic truth)
        cycles = (row["epoch"] - star.epoch) / row["period"]
        assert abs(cycles - round(cycles)) < 0.03, role
        # a depth from the fold (core.final.eclipse_shape of the V points at the
        # exported period), not a Fourier peak-to-peak
        fourier_ptp = _analysed(ledger, roles[role]).band_numbers("amplitude_by_band")["V"]
        t, m, e = ledger.lightcurve(roles[role]).arrays("V")
        depth = eclipse_shape(t, m, e, row["period"]).depth_primary
        assert row["amplitude_V"] == pytest.approx(depth, rel=1e-9), role
        assert row["amplitude_V"] != pytest.approx(fourier_ptp, rel=1e-3), role
        assert 0 <= row["depth2_V"] <= row["amplitude_V"]
    # the contact binary's depth is within 10% of the injected one; the detached
    # binary's narrow eclipse (0.05 in phase) is smeared by the period's error over
    # the baseline, yet its depth is still over half the injected one where the
    # Fourier peak-to-peak gives under a fifth
    ew, ea = rows[roles["ew"]], rows[roles["ea"]]
    assert ew["amplitude_V"] == pytest.approx(truth[roles["ew"]].amplitude_V, rel=0.10)
    assert 0.5 < ea["amplitude_V"] / truth[roles["ea"]].amplitude_V < 1.1


def test_rrab_metallicity_is_the_published_relation_of_the_exported_numbers(field):
    ledger, roles, _ = field
    row = _rows(ledger)[roles["rrab"]]
    assert row["fourier_form"] == "sine" and row["fourier_band"] == "V"
    # Jurcsik & Kovacs 1996, A&A 312, 111 (sine series, V, P in days), as quoted
    # in REFERENCES.md: [Fe/H]_JK = -5.038 - 5.394 P + 1.345 phi31
    feh_jk = -5.038 - 5.394 * row["period"] + 1.345 * row["phi31"]
    assert row["feh_jk"] == pytest.approx(feh_jk, abs=1e-9)
    # Jurcsik 1995, AcA 45, 653: [Fe/H]_ZW = 0.6988 [Fe/H]_JK - 0.615
    assert row["feh_zw"] == pytest.approx(0.6988 * feh_jk - 0.615, abs=1e-9)
    assert "Jurcsik" in row["feh_relation"]
    # the worked numbers of REFERENCES.md for the same arithmetic: P = 0.55, phi31 = 5.0
    assert -5.038 - 5.394 * 0.55 + 1.345 * 5.0 == pytest.approx(-1.280, abs=1e-3)


def _refit_a(ledger, star, period):
    """A1, A2 of a fresh Fourier fit of the V points at ``period`` (order 4)."""
    lc = ledger.lightcurve(star)
    t, m, e = lc.arrays("V")
    fit = fit_fourier(t, m, e, 1.0 / period, 4)
    return fit.amplitudes[0], fit.amplitudes[1]


def test_confirm_keeps_the_suggestion_numbers(field):
    ledger, roles, _ = field
    before = _rows(ledger)[roles["rrab"]]
    record_verdict(ledger, roles["rrab"], "confirmed")
    row = _rows(ledger)[roles["rrab"]]
    check_row(row)
    assert row["status"] == "confirmed" and row["class"] == "RRab"
    for name in ("period", "period_err", "epoch", "A1", "phi31", "feh_zw", "distance"):
        assert row[name] == before[name], name
    assert "not stored" not in row["flags"]


def test_relabel_pulsator_as_eclipsing(field):
    ledger, roles, truth = field
    star = roles["ew_as_rrc"]
    analysed = _analysed(ledger, star)
    assert analysed.top.class_code == "RRc" and analysed.physics_list  # RRc physics analysed
    record_verdict(ledger, star, "relabelled", class_code="EW")
    row = _rows(ledger)[star]
    check_row(row)
    assert row["class"] == "EW" and row["verdict_class"] == "EW"
    assert row["suggested_class"] == "RRc"  # the suggestion is kept apart
    assert row["period"] == pytest.approx(2 * analysed.number("period"), rel=1e-12)
    assert row["period"] == pytest.approx(truth[star].period, rel=1e-3)
    assert row["R21"] > 1.0
    a1, a2 = _refit_a(ledger, star, row["period"])
    assert a2 > a1  # an independent fit at the row's period agrees: A2 > A1
    assert _nan(row["feh_zw"]) and _nan(row["distance"])  # the RRc physics is gone


def test_relabel_eclipsing_as_pulsator(field):
    ledger, roles, _ = field
    star = roles["ew"]
    analysed = _analysed(ledger, star)
    record_verdict(ledger, star, "relabelled", class_code="RRc", period=analysed.number("period"))
    row = _rows(ledger)[star]
    check_row(row)
    assert row["period"] == pytest.approx(analysed.number("period"), rel=1e-12)
    assert row["period_source"] == "analysis"
    assert row["epoch_kind"] == EPOCH_MAXIMUM
    assert "mww07_rrc_feh" in row["feh_relation"]  # RRc physics, and only that
    assert _nan(row["feh_jk"])


def test_relabel_as_const_has_no_period(field):
    ledger, roles, _ = field
    star = roles["rrc"]
    record_verdict(ledger, star, "relabelled", class_code="NONVAR", period=0.3)  # alias
    assert ledger.verdict(star).class_code == "CONST" and ledger.verdict(star).period is None
    row = _rows(ledger)[star]
    check_row(row)
    assert row["class"] == "CONST" and row["n_points_V"] > 0
    assert row["mean_mag_V"] == pytest.approx(
        np.median(ledger.lightcurve(star).arrays("V")[1]), abs=0.5
    )


def test_persons_period_double_and_nudge(field):
    ledger, roles, _ = field
    star = roles["rrab"]
    analysed = _analysed(ledger, star)
    nudged = analysed.number("period") * (1 + 2e-5)
    record_verdict(ledger, star, "confirmed", period=nudged)
    row = _rows(ledger)[star]
    check_row(row)
    assert row["period_source"] == "person"
    # refined locally: back within a few errors of the analysed period
    assert abs(row["period"] - analysed.number("period")) < 5 * analysed.number("period_err")
    assert "refined locally" in row["flags"]
    star = roles["ea"]
    analysed = _analysed(ledger, star)
    final = StarResult.from_dict(ledger.result(star).result).final
    doubled = 2 * final["period"]
    record_verdict(ledger, star, "relabelled", class_code="EA", period=doubled)
    row = _rows(ledger)[star]
    check_row(row)
    assert row["period"] == pytest.approx(doubled, rel=1e-4)
    stored = ledger.verdict(star).final
    assert stored["fourier"]["period"] == pytest.approx(row["period"], rel=1e-12)


def test_reject_and_defer(field):
    ledger, roles, _ = field
    record_verdict(ledger, roles["rrd"], "rejected", note="blend")
    record_verdict(ledger, roles["const"], "deferred")
    rows = _rows(ledger)
    rejected, deferred = rows[roles["rrd"]], rows[roles["const"]]
    check_row(rejected)
    assert rejected["class"] == "" and _nan(rejected["period"]) and rejected["note"] == "blend"
    check_row(deferred)
    assert deferred["class"] == "CONST" and deferred["suggested_class"] == "CONST"


def test_undo_and_redo_restore_the_numbers(field):
    ledger, roles, _ = field
    star = roles["rrc"]
    record_verdict(ledger, star, "confirmed")
    confirmed = _rows(ledger)[star]
    record_verdict(ledger, star, "relabelled", class_code="DSCT")
    relabelled = _rows(ledger)[star]
    assert relabelled["class"] == "DSCT" and relabelled["feh_zw"] != confirmed["feh_zw"]
    ledger.undo()
    back = _rows(ledger)[star]
    assert back["class"] == "RRc" and back["feh_zw"] == confirmed["feh_zw"]
    ledger.redo()
    again = _rows(ledger)[star]
    assert again["class"] == "DSCT" and again["abs_mag"] == relabelled["abs_mag"]


def test_finalise_after_reanalysis(field):
    ledger, roles, _ = field
    star = roles["rrab"]
    record_verdict(ledger, star, "relabelled", class_code="RRab", period=None)
    assert finalise_stars(ledger, [star]) == 0  # up to date
    stored = ledger.result(star).result
    changed = {**stored, "outlier_times": [*stored.get("outlier_times", []), -1.0]}
    ledger.store_results([(star, stored["settings_hash"], changed)])
    # what 'phasewise analyse' does after a run: the numbers follow the new result
    decided = ledger.verdict(star)
    assert finalise_stars(ledger, [star]) == 1
    refreshed = ledger.verdict(star)
    assert refreshed.final["result_key"] == result_key(changed)
    # new numbers are not a new decision: the decision and its time stay
    assert refreshed.decided_at == decided.decided_at
    assert (refreshed.status, refreshed.class_code, refreshed.period, refreshed.note) == (
        decided.status,
        decided.class_code,
        decided.period,
        decided.note,
    )
    ledger.undo()
    assert ledger.verdict(star) == decided  # and undo brings the old numbers back
    ledger.redo()
    assert finalise_stars(ledger, [star]) == 0
    assert "earlier analysis" not in _rows(ledger)[star]["flags"]


def test_population_points_use_the_verdicts_numbers(field):
    ledger, roles, _ = field
    star = roles["ew_as_rrc"]
    record_verdict(ledger, star, "relabelled", class_code="EW")
    point = star_point(ledger, star)
    row = _rows(ledger)[star]
    assert point.class_code == "EW" and point.period == row["period"]
    assert point.R21 == row["R21"] > 1.0  # the orbital period's Fourier terms
    assert point.features["period"] == row["period"]
    record_verdict(ledger, star, "relabelled", class_code="CONST")
    assert star_point(ledger, star).period is None
