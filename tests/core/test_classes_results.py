"""The class registry and the typed result model."""

import json

import pytest

from phasewise.core.analysis import analyse
from phasewise.core.classes import (
    ALIASES,
    CLASS_CODES,
    CLASSES,
    EPOCH_MAXIMUM,
    EPOCH_PRIMARY_MINIMUM,
    canonical_code,
    epoch_kind,
    is_periodic,
)
from phasewise.core.classify import CLASS_CODES as RULEBOOK_CODES
from phasewise.core.errors import PhasewiseError
from phasewise.core.physics import RELATIONS
from phasewise.core.results import StarResult
from phasewise.core.synthetic import make_survey
from phasewise.core.vetting import ECLIPSING_CLASSES, NON_PERIODIC_CLASSES


def test_registry_and_relations_agree_both_ways():
    for code, info in CLASSES.items():
        for name in info.relations:
            assert code in RELATIONS[name].applies_to, (code, name)
    for name, relation in RELATIONS.items():
        for code in relation.applies_to:
            if code != "*":
                assert name in CLASSES[code].relations, (code, name)


def test_one_spelling_of_the_non_variable_class():
    assert "CONST" in CLASS_CODES and "NONVAR" not in CLASS_CODES
    assert canonical_code("NONVAR") == "CONST" == ALIASES["NONVAR"]
    assert not is_periodic("NONVAR") and not is_periodic("CONST")
    assert NON_PERIODIC_CLASSES == {"CONST", "NONVAR", "LONG"}
    assert ECLIPSING_CLASSES == {"EA", "EB", "EW"}
    assert tuple(RULEBOOK_CODES) == CLASS_CODES  # the rulebook uses the registry
    with pytest.raises(PhasewiseError, match="unknown class 'RRx'"):
        canonical_code("RRx")


def test_epoch_kinds():
    assert epoch_kind("RRab") == EPOCH_MAXIMUM and epoch_kind("DCEP(1O)") == EPOCH_MAXIMUM
    assert epoch_kind("EW") == EPOCH_PRIMARY_MINIMUM
    assert epoch_kind("CONST") is None


@pytest.fixture(scope="module")
def stored():
    survey = make_survey(12, seed=7)
    return [json.loads(json.dumps(analyse(lc).to_dict())) for lc in survey.lightcurves]


def test_result_model_round_trips_stored_results(stored):
    for data in stored:
        assert StarResult.from_dict(data).to_dict() == data


def test_unknown_and_new_keys_are_kept(stored):
    data = dict(next(d for d in stored if d["secondary_periods"]))
    data["set_aside"] = [3, 7]
    data["trend"] = {"slope": 0.01}
    data["relation_band"] = "V"
    data["something_new"] = {"x": [1, 2]}
    data["secondary_periods"] = [{**p, "snr": 5.5, "future": 1} for p in data["secondary_periods"]]
    data["fourier"] = {**data["fourier"], "future": "y"}
    model = StarResult.from_dict(data)
    assert model.to_dict() == data
    assert model.set_aside_indices() == (3, 7) and model.relation_band == "V"
    assert model.extra["something_new"] == {"x": [1, 2]}
    assert model.secondary_list[0].extra["future"] == 1


def test_reading_through_the_model(stored):
    rrab = next(StarResult.from_dict(d) for d in stored if d["suggestions"][0]["class"] == "RRab")
    assert rrab.top.class_code == "RRab" and 0 < rrab.top.score <= 1
    terms = rrab.primary_fourier
    assert terms.amplitude(1) == rrab.to_dict()["fourier"]["amplitudes"][0]
    assert terms.sine_phi("phi31") == terms.value("phi31")  # stored in the sine form
    quantities = [p.quantity for p in rrab.physics_list]
    assert "[Fe/H]_JK" in quantities and "[Fe/H]_ZW" in quantities
    assert rrab.number("period") > 0 and rrab.number("reason") is None
