"""The state of a vetting session, observable, with no GUI in it.

The desk shows one star at a time and lets the person try periods by hand:
nudges, halving and doubling, the next or previous candidate.  That state
lives here as plain Python so it can be tested without a screen; widgets
subscribe to its events and redraw.  Events fire only when a value really
changes.

Events
------
``"star"``   : callback(star_id) after :meth:`VettingSession.load_star`.
``"period"`` : callback(period, source) when the trial period changes;
               ``source`` is ``"analysis"``, ``"nudge"``, ``"candidate"``,
               ``"halve"``, ``"double"``, ``"peak"`` or ``"entry"``.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence

from .classes import ALIASES, CLASSES
from .errors import PhasewiseError
from .folding import period_step

__all__ = [
    "VettingSession",
    "Listeners",
    "SMALL_STEP_CYCLES",
    "LARGE_STEP_CYCLES",
    "ECLIPSING_CLASSES",
    "NON_PERIODIC_CLASSES",
]

#: A small nudge moves the last point's phase by this many cycles.
SMALL_STEP_CYCLES = 0.005
#: A large nudge moves it by this many cycles.
LARGE_STEP_CYCLES = 0.05
#: Classes whose true period is often twice the periodogram's best period
#: (two similar minima per cycle; common practice, no source).
ECLIPSING_CLASSES = frozenset(c.code for c in CLASSES.values() if c.eclipsing)
#: Classes a verdict records without a period (a constant star has none);
#: the registry's aliases included.
NON_PERIODIC_CLASSES = frozenset(
    [c.code for c in CLASSES.values() if not c.periodic]
    + [alias for alias, code in ALIASES.items() if not CLASSES[code].periodic]
)


class Listeners:
    """Named events and their callbacks: the one listener scheme of the desk's models."""

    #: The event names a subclass emits.
    EVENTS: tuple[str, ...] = ()

    def __init__(self) -> None:
        self._listeners: dict[str, list[Callable]] = {name: [] for name in self.EVENTS}

    def subscribe(self, event: str, callback: Callable) -> Callable[[], None]:
        """Call ``callback`` on ``event`` (one of :attr:`EVENTS`); returns an unsubscribe."""
        if event not in self._listeners:
            raise PhasewiseError(
                f"unknown event {event!r}; expected one of {', '.join(self.EVENTS)}",
                field="event",
            )
        self._listeners[event].append(callback)
        return lambda: self.unsubscribe(event, callback)

    def unsubscribe(self, event: str, callback: Callable) -> None:
        if callback in self._listeners.get(event, ()):
            self._listeners[event].remove(callback)

    def _emit(self, event: str, *args) -> None:
        for callback in list(self._listeners[event]):
            callback(*args)


class VettingSession(Listeners):
    """Current star, trial period and candidates of one vetting session."""

    EVENTS = ("star", "period")

    def __init__(self) -> None:
        super().__init__()
        self.star_id: str | None = None
        self.period: float | None = None
        self.analysed_period: float | None = None
        self.baseline: float = 0.0
        self.candidates: tuple[float, ...] = ()
        self.candidate_index: int | None = None

    # --------------------------------------------------------------- state
    def load_star(
        self,
        star_id: str,
        period: float | None,
        candidates: Sequence[float] = (),
        baseline: float = 0.0,
    ) -> None:
        """Show a new star at its analysed period (or none)."""
        self.star_id = str(star_id)
        self.candidates = tuple(float(p) for p in candidates if p and math.isfinite(p) and p > 0)
        self.baseline = float(baseline or 0.0)
        self.analysed_period = float(period) if period and math.isfinite(period) else None
        if self.analysed_period is None and self.candidates:
            self.analysed_period = self.candidates[0]
        self.period = self.analysed_period
        self.candidate_index = self._index_of(self.period)
        self._emit("star", self.star_id)
        self._emit("period", self.period, "analysis")

    def set_period(self, period: float, source: str = "entry") -> None:
        """Set the trial period (days)."""
        if period is None or not math.isfinite(period) or period <= 0:
            raise PhasewiseError(f"a period must be positive, got {period!r}", field="period")
        period = float(period)
        if self.period is not None and period == self.period:
            return
        self.period = period
        self.candidate_index = self._index_of(period)
        self._emit("period", period, source)

    @property
    def overridden(self) -> bool:
        """True when the trial period differs from the analysed one."""
        if self.period is None or self.analysed_period is None:
            return False
        return not math.isclose(self.period, self.analysed_period, rel_tol=1e-12)

    def reset_period(self) -> None:
        if self.analysed_period is not None:
            self.set_period(self.analysed_period, "analysis")

    def step(self, large: bool = False) -> float:
        """The period change of one nudge at the current period."""
        if self.period is None:
            return 0.0
        cycles = LARGE_STEP_CYCLES if large else SMALL_STEP_CYCLES
        return period_step(self.period, self.baseline, cycles)

    def nudge(self, steps: int = 1, large: bool = False) -> None:
        """Move the period by ``steps`` nudges (negative: shorter)."""
        if self.period is None:
            return
        new = self.period + steps * self.step(large)
        if new > 0:
            self.set_period(new, "nudge")

    def halve(self) -> None:
        if self.period is not None:
            self.set_period(self.period / 2.0, "halve")

    def double(self) -> None:
        if self.period is not None:
            self.set_period(self.period * 2.0, "double")

    def cycle_candidate(self, direction: int = 1) -> None:
        """Go to the next (``+1``) or previous (``-1``) candidate period."""
        if not self.candidates:
            return
        if self.candidate_index is None:
            index = 0 if direction > 0 else len(self.candidates) - 1
        else:
            index = (self.candidate_index + direction) % len(self.candidates)
        self.set_period(self.candidates[index], "candidate")
        self.candidate_index = index

    def alternative_period(self, class_code: str | None = None) -> float | None:
        """The period to compare against, shown in the second fold.

        Twice the trial period for eclipsing classes (two minima per cycle);
        otherwise the best candidate that is not the trial period (a nudge of
        less than 0.1 % keeps the trial period "at" its candidate, so the
        comparison stays put while the period is fine-tuned).
        """
        if self.period is None:
            return None
        if class_code in ECLIPSING_CLASSES:
            return 2.0 * self.period
        for p in self.candidates:
            if not math.isclose(p, self.period, rel_tol=1e-3):
                return p
        return 2.0 * self.period

    def _index_of(self, period: float | None) -> int | None:
        if period is None:
            return None
        for i, p in enumerate(self.candidates):
            if math.isclose(p, period, rel_tol=1e-12):
                return i
        return None
