import pytest

from phasewise.core.errors import PhasewiseError
from phasewise.core.folding import period_step
from phasewise.core.vetting import LARGE_STEP_CYCLES, SMALL_STEP_CYCLES, VettingSession


def _session():
    s = VettingSession()
    events = []
    s.subscribe("star", lambda sid: events.append(("star", sid)))
    s.subscribe("period", lambda p, src: events.append(("period", p, src)))
    s.load_star("V7", 0.55, candidates=[0.55, 0.3548, 1.1], baseline=200.0)
    return s, events


def test_load_star_emits_star_then_period():
    s, events = _session()
    assert events == [("star", "V7"), ("period", 0.55, "analysis")]
    assert s.candidate_index == 0 and not s.overridden


def test_nudge_uses_the_phase_step_and_marks_override():
    s, events = _session()
    s.nudge(+1)
    assert s.period == pytest.approx(0.55 + period_step(0.55, 200.0, SMALL_STEP_CYCLES))
    s.nudge(-2, large=True)
    assert s.overridden
    assert events[-1][2] == "nudge"
    assert LARGE_STEP_CYCLES > SMALL_STEP_CYCLES
    s.reset_period()
    assert s.period == 0.55 and not s.overridden


def test_no_event_when_value_does_not_change():
    s, events = _session()
    n = len(events)
    s.set_period(0.55)
    assert len(events) == n


def test_halve_double_and_candidate_cycling():
    s, _ = _session()
    s.double()
    assert s.period == 1.1 and s.candidate_index == 2
    s.cycle_candidate(+1)
    assert s.period == 0.55 and s.candidate_index == 0
    s.cycle_candidate(-1)
    assert s.period == 1.1
    s.halve()
    assert s.period == pytest.approx(0.55)


def test_alternative_period():
    s, _ = _session()
    assert s.alternative_period("RRab") == 0.3548
    s.nudge(+3)  # fine-tuning keeps the comparison fold where it was
    assert s.alternative_period("RRab") == 0.3548
    s.set_period(0.3548)
    assert s.alternative_period("RRab") == 0.55
    assert s.alternative_period("EW") == pytest.approx(2 * 0.3548)


def test_bad_input_messages():
    s, _ = _session()
    with pytest.raises(PhasewiseError, match="field 'period'"):
        s.set_period(-1.0)
    with pytest.raises(PhasewiseError, match="unknown event"):
        s.subscribe("colour", print)
