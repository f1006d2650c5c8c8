"""The vetting desk's state over a ledger, observable, with no GUI in it.

:class:`DeskModel` is what every panel of the desk and the population view
listen to.  It holds the ledger being vetted, the current star (light curve,
stored result, verdict), the trial period (a :class:`~core.vetting.VettingSession`),
the caches of star data, periodograms and fold models, and the verdict
policy: which class and which period a verdict records.

The ledger is the one source of change events.  The model subscribes to
:meth:`Ledger.subscribe` and turns each committed :class:`~core.ledger.Change`
into events of its own, whoever made the write (this desk, a re-analysis, an
undo), so nothing shown is ever stale.  A change is handled through the
model's ``dispatch`` (default: at once, in the thread that wrote); a GUI
passes one that runs it in its own thread, where its widgets live.

Events (``model.subscribe(name, callback)``)
--------------------------------------------
``"ledger"``   : callback() after :meth:`DeskModel.set_ledger`.
``"star"``     : callback(star_id) when the current star is (re)loaded.
``"lightcurve"``: callback(star_id) when the current star's exclusion mask
                 changed (the trial period is kept).
``"verdict"``  : callback(star_id) when a star's verdict changed.
``"rows"``     : callback(star_ids) when list lines must be re-read
                 (an empty tuple: every line).
``"history"``  : callback() after any change (the undo/redo labels).
``"settings"`` : callback() when the analysis settings in use changed.
``"change"``   : callback(change) with the ledger's own
                 :class:`~core.ledger.Change`, after the events above.
"""

from __future__ import annotations

import math
from collections import OrderedDict
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass, field
from typing import Any, Protocol, runtime_checkable

from .classes import CLASSES, canonical_code
from .errors import PhasewiseError
from .vetting import NON_PERIODIC_CLASSES, Listeners, VettingSession

__all__ = ["DeskLedger", "DeskModel", "StarAnalyser", "StarData", "VerdictPlan", "EVENTS"]

EVENTS = ("ledger", "star", "lightcurve", "verdict", "rows", "history", "settings", "change")
#: Stars whose light curve and result are kept in memory.
STAR_CACHE = 256
#: Periodograms kept in memory (each a few MB at 10^5 frequencies).
PERIODOGRAM_CACHE = 64
#: Changes that replace a star's light curve or result (drop what was cached).
_DATA_CHANGES = frozenset({"import", "results", "excluded", "undo", "redo"})


@runtime_checkable
class DeskLedger(Protocol):
    """What the desk uses of a ledger (:class:`core.ledger.Ledger` is one)."""

    path: Any
    readonly: bool

    @property
    def n_stars(self) -> int: ...
    def __contains__(self, star_id: object) -> bool: ...
    def star_ids(self) -> list[str]: ...
    def star_rows(self) -> list: ...
    def star_row(self, star_id: str) -> Any: ...
    def star_rows_of(self, star_ids: Sequence[str]) -> list: ...
    def star_order(
        self,
        sort: str | None = None,
        *,
        descending: bool = False,
        status: str | None = None,
        text: str = "",
        no_period: Any = (),
    ) -> list[str]: ...
    def lightcurve(self, star_id: str) -> Any: ...
    def result(self, star_id: str) -> Any: ...
    def verdict(self, star_id: str) -> Any: ...
    def status_counts(self) -> dict[str, int]: ...
    def set_excluded(self, star_id: str, mask: Any, *, reason: str = "") -> None: ...
    def store_results(self, items: Any) -> None: ...
    def store_failures(self, items: Any) -> None: ...
    def analysis_settings(self) -> Any: ...
    def set_analysis_settings(self, settings: dict, settings_hash: str) -> None: ...
    def stars_needing_analysis(self, settings_hash: str, only: str = ...) -> list[str]: ...
    def subscribe(self, callback: Callable[[Any], None]) -> Callable[[], None]: ...
    def undo(self) -> Any: ...
    def redo(self) -> Any: ...
    def undo_label(self) -> str | None: ...
    def redo_label(self) -> str | None: ...
    def close(self) -> None: ...


@dataclass(frozen=True)
class StarData:
    """One star as the desk shows it: light curve, stored result (a dict), staleness."""

    lc: Any
    result: dict = field(default_factory=dict)
    stale: bool = False


@dataclass(frozen=True)
class VerdictPlan:
    """What a verdict on the current star would record."""

    star_id: str
    status: str
    class_code: str | None
    period: float | None


class DeskModel(Listeners):
    """The desk's ledger, current star, trial period, caches and verdict policy.

    Parameters
    ----------
    ledger : DeskLedger, optional
        The ledger to vet (see :meth:`set_ledger`).
    dispatch : callable, optional
        ``dispatch(fn)`` runs ``fn()`` where the listeners live; the ledger's
        change events go through it (default: run at once).
    """

    EVENTS = EVENTS

    def __init__(
        self, ledger: DeskLedger | None = None, dispatch: Callable[[Callable], None] | None = None
    ) -> None:
        super().__init__()
        self.dispatch = dispatch or (lambda fn: fn())
        self.session = VettingSession()
        self.ledger: DeskLedger | None = None
        self.settings = None  # the ledger's analysis settings, loaded lazily
        self.settings_message = ""
        self.star_id: str | None = None
        self.data: StarData | None = None
        self.verdict = None
        self._stars: OrderedDict[str, StarData] = OrderedDict()
        self._periodograms: OrderedDict[tuple, Any] = OrderedDict()
        self._folds = None
        self._unsubscribe: Callable[[], None] | None = None
        if ledger is not None:
            self.set_ledger(ledger)

    # --------------------------------------------------------------- ledger
    @property
    def read_only(self) -> bool:
        return bool(self.ledger is not None and self.ledger.readonly)

    def set_ledger(self, ledger: DeskLedger | None) -> None:
        """Vet ``ledger`` (None: nothing); its own analysis settings load lazily."""
        if self._unsubscribe is not None:
            self._unsubscribe()
            self._unsubscribe = None
        self.ledger = ledger
        self.settings, self.settings_message = None, ""
        self.star_id, self.data, self.verdict = None, None, None
        self.clear_caches()
        if ledger is not None:
            self._unsubscribe = ledger.subscribe(
                lambda change, ledger=ledger: self.dispatch(lambda: self._apply(ledger, change))
            )
        self._emit("ledger")
        self._emit("history")

    def close_ledger(self) -> None:
        """Close the ledger (its lock is released) and show nothing."""
        ledger = self.ledger
        self.set_ledger(None)
        if ledger is not None:
            ledger.close()

    def clear_caches(self) -> None:
        self._stars.clear()
        self._periodograms.clear()
        if self._folds is not None:
            self._folds.clear()

    def star_ids(self) -> list[str]:
        return list(self.ledger.star_ids()) if self.ledger is not None else []

    def undo_labels(self) -> tuple[str | None, str | None]:
        """What undo and redo would do (None: nothing, or no ledger)."""
        if self.ledger is None:
            return None, None
        return self.ledger.undo_label(), self.ledger.redo_label()

    # ------------------------------------------------------------- settings
    def load_settings(self) -> tuple[Any, str]:
        """The ledger's analysis settings and a message (defaults, if they no longer fit).

        Pure: safe to run in a worker thread (it imports the analysis, which
        takes a second); :meth:`use_settings` then adopts them.
        """
        from .analysis import AnalysisSettings
        from .settings_file import ledger_settings

        if self.ledger is None:
            return AnalysisSettings(), ""
        try:
            return ledger_settings(self.ledger), ""
        except PhasewiseError as exc:
            message = (
                f"The ledger's analysis settings could not be used ({exc}); defaults are in use."
            )
            return AnalysisSettings(), message

    def use_settings(self, settings, message: str = "", *, ledger=None) -> None:
        """Adopt analysis settings (``ledger``: only if it is still the one shown)."""
        if ledger is not None and ledger is not self.ledger:
            return
        self.settings, self.settings_message = settings, message
        self._periodograms.clear()
        self._emit("settings")

    def analysis_settings(self):
        """The settings in use: the ledger's own until changed (loaded now if need be)."""
        if self.settings is None:
            self.use_settings(*self.load_settings())
        return self.settings

    # ---------------------------------------------------------------- stars
    def star_data(self, star_id: str) -> StarData:
        """One star's light curve and stored result, cached."""
        if star_id in self._stars:
            self._stars.move_to_end(star_id)
            return self._stars[star_id]
        if self.ledger is None:
            raise PhasewiseError("no ledger is open", field="star_id")
        lc = self.ledger.lightcurve(star_id)
        stored = self.ledger.result(star_id)
        result: dict = {}
        stale = False
        if stored is not None:
            stale = bool(stored.stale)
            if stored.failed:
                result = {"status": "failed", "reason": stored.error or "analysis failed"}
            else:
                result = dict(stored.result or {})
        data = StarData(lc, result, stale)
        self._stars[star_id] = data
        while len(self._stars) > STAR_CACHE:
            self._stars.popitem(last=False)
        return data

    def load_star(self, star_id: str) -> None:
        """Make ``star_id`` current at its verdict's period, else the analysed one."""
        if self.ledger is None or not star_id:
            return
        data = self.star_data(star_id)
        self.star_id, self.data = str(star_id), data
        self.verdict = self.ledger.verdict(star_id)
        candidates = [c.get("period") for c in data.result.get("candidates") or []]
        period = getattr(self.verdict, "period", None) or data.result.get("period")
        # the session's own "star" event comes first: listeners read the model here
        self.session.load_star(star_id, period, candidates, data.lc.baseline)
        self._emit("star", self.star_id)

    @property
    def lc(self):
        return self.data.lc if self.data is not None else None

    @property
    def result(self) -> dict:
        return self.data.result if self.data is not None else {}

    def primary_band(self) -> str | None:
        """The band the analysis measured first, else the curve's best-sampled band."""
        if self.lc is None:
            return None
        bands = list(self.lc.bands)
        band = self.result.get("primary_band")
        return band if band in bands else (bands[0] if bands else None)

    # ------------------------------------------------------- verdict policy
    def class_code(self) -> str | None:
        """The verdict's class, else the current star's top suggestion."""
        code = getattr(self.verdict, "class_code", None)
        return code or self.suggested_class()

    def suggested_class(self) -> str | None:
        top = self._top()
        return top.class_code if top is not None else None

    def suggested_period(self) -> float | None:
        """The top suggestion's own period (twice the analysed one for eclipsing)."""
        top = self._top()
        period = getattr(top, "period", None) if top is not None else None
        try:
            period = float(period) if period else None
        except (TypeError, ValueError):
            return None
        return period if period and math.isfinite(period) and period > 0 else None

    def _top(self):
        from .results import StarResult

        return StarResult.from_dict(self.result).top if self.result else None

    def eclipsing(self) -> bool:
        from .classes import is_eclipsing

        return is_eclipsing(self.class_code())

    def verdict_period(self, status: str, class_code: str | None = None) -> float | None:
        """The period a verdict records.

        None for a class without a period (a constant star); the trial period
        when it was changed by hand; for a confirmation otherwise the
        suggestion's own period (e.g. twice the Fourier period of an eclipsing
        binary); else the trial period.
        """
        if class_code in NON_PERIODIC_CLASSES:
            return None
        suggested = self.suggested_period()
        if status == "confirmed" and not self.session.overridden and suggested:
            return suggested
        return self.session.period

    def plan_verdict(self, status: str, class_code: str | None = None) -> VerdictPlan:
        """The class and period a verdict of ``status`` on the current star records."""
        if self.star_id is None:
            raise PhasewiseError("no star is shown", field="star_id")
        if status == "confirmed" and not class_code:
            class_code = self.suggested_class()
            if class_code is None:
                raise PhasewiseError(
                    f"star {self.star_id} has no suggestion to confirm; relabel it instead",
                    field="class_code",
                )
        code = canonical_code(class_code) if class_code else None
        if code is not None and code not in CLASSES:
            raise PhasewiseError(f"unknown class {class_code!r}", field="class_code")
        return VerdictPlan(self.star_id, status, code, self.verdict_period(status, code))

    def record_verdict(self, status: str, class_code: str | None = None, note: str | None = None):
        """Record a verdict on the current star with its final numbers; returns the plan.

        Raises :class:`PhasewiseError` for a read-only ledger or an impossible
        verdict; the ledger's change event updates every view.
        """
        if self.ledger is None:
            raise PhasewiseError("no ledger is open", field="star_id")
        if self.read_only:
            raise PhasewiseError(
                "the ledger is read-only: no verdict recorded", file=self.ledger.path
            )
        plan = self.plan_verdict(status, class_code)
        from .final import record_verdict

        record_verdict(
            self.ledger,
            plan.star_id,
            plan.status,
            class_code=plan.class_code,
            period=plan.period,
            note=note or None,
            settings=self.analysis_settings(),
        )
        return plan

    def alternative_period(self) -> float | None:
        return self.session.alternative_period(self.class_code())

    def use_alternative(self) -> None:
        alt = self.alternative_period()
        if alt:
            self.session.set_period(alt, "candidate")

    # ------------------------------------------------------------ exclusion
    def set_excluded(self, indices: Sequence[int], exclude: bool) -> None:
        """Exclude (or restore) points of the current star; stored at once (undoable)."""
        import numpy as np

        if self.ledger is None or self.lc is None:
            return
        mask = np.array(self.lc.excluded, dtype=bool)
        mask[np.asarray(indices, dtype=int)] = bool(exclude)
        self.ledger.set_excluded(self.star_id, mask)

    # -------------------------------------------------------------- history
    def undo(self):
        """Undo the latest action (None if nothing); the change event updates the views."""
        return self.ledger.undo() if self.ledger is not None else None

    def redo(self):
        return self.ledger.redo() if self.ledger is not None else None

    # --------------------------------------------------------------- caches
    def periodogram(self, key: tuple):
        """A cached periodogram (``key`` starts with the star id), or None."""
        value = self._periodograms.get(key)
        if value is not None:
            self._periodograms.move_to_end(key)
        return value

    def keep_periodogram(self, key: tuple, value: Any) -> None:
        self._periodograms[key] = value
        while len(self._periodograms) > PERIODOGRAM_CACHE:
            self._periodograms.popitem(last=False)

    def fold_model(self, lc, period, settings=None, band=None, eclipsing=False, result=None):
        """The analysis model at a trial period (:func:`core.folding.fold_model`), cached."""
        return self._fold_cache().get(lc, period, settings, band, eclipsing, result)

    def cached_fold_model(self, lc, period, settings=None, band=None, eclipsing=False, result=None):
        """The model at a trial period if already fitted, else None (fits nothing)."""
        return self._fold_cache().cached(lc, period, settings, band, eclipsing, result)

    def _fold_cache(self):
        if self._folds is None:
            from .folding import FoldModelCache

            self._folds = FoldModelCache()
        return self._folds

    def _forget(self, star_ids: Iterable[str], periodograms: bool) -> None:
        for star_id in star_ids:
            self._stars.pop(star_id, None)
        if periodograms:
            ids = set(star_ids)
            for key in [k for k in self._periodograms if k[0] in ids]:
                del self._periodograms[key]

    # ------------------------------------------------------------ analyses
    def store_outcomes(self, outcomes: Iterable[Any]) -> None:
        """Store ``core.batch.StarOutcome`` s of this desk's own analyses in one write each.

        The results are keyed by the settings in use; the ledger's change
        event then updates every view.
        """
        settings = self.analysis_settings()
        outcomes = list(outcomes)
        results = [(o.star_id, settings.hash, o.result) for o in outcomes if not o.failed]
        failures = [(o.star_id, settings.hash, o.error, o.detail) for o in outcomes if o.failed]
        if results:
            self.ledger.store_results(results)
        if failures:
            self.ledger.store_failures(failures)

    def hand_over(self, only: str) -> tuple[Any, list[str]]:
        """Release the ledger to a batch run (``core.batch.analyse_ledger``).

        The batch takes the ledger's write lock, so the desk closes its own
        connection and keeps browsing on a read-only one.  Returns the path
        and the stars the run will analyse; :meth:`take_back` ends it.
        """
        if self.ledger is None or self.read_only:
            raise PhasewiseError("no writable ledger is open", field="ledger")
        settings = self.analysis_settings()
        self.ledger.set_analysis_settings(settings.to_dict(), settings.hash)
        if only == "all":
            todo = list(self.ledger.star_ids())
        else:
            todo = list(self.ledger.stars_needing_analysis(settings.hash, only=only))
        path, current = self.ledger.path, self.star_id
        from .ledger import Ledger

        self.ledger.close()
        self._reopen(Ledger.open(path, readonly=True), current, settings)
        return path, todo

    def take_back(self, path, analysed: Sequence[str]) -> None:
        """Reopen the ledger for writing after a batch run and report what it wrote.

        The run wrote through a connection of its own; its writes reach the
        views as the ledger's ``Change("results", analysed)``, exactly as if
        this desk had stored them.
        """
        from .ledger import Change, Ledger

        current, settings = self.star_id, self.settings
        if self.ledger is not None:
            self.ledger.close()
        self._reopen(Ledger.open(path), current, settings)
        if analysed:
            self._ledger_changed(Change("results", tuple(analysed)))

    def _reopen(self, ledger, star_id: str | None, settings) -> None:
        """The same ledger file through another connection: same star, same settings."""
        self.set_ledger(ledger)
        if settings is not None:
            self.use_settings(settings)
        if star_id:
            self.load_star(star_id)

    # -------------------------------------------------------------- changes
    def _apply(self, ledger, change) -> None:
        if ledger is self.ledger:  # not one closed while the change was on its way
            self._ledger_changed(change)

    def _ledger_changed(self, change) -> None:
        ids = tuple(change.star_ids)
        everything = change.what == "import" or (not ids and change.what in _DATA_CHANGES)
        if change.what in _DATA_CHANGES:
            if everything:
                self.clear_caches()
            else:
                # a new result leaves the light curve (and so its periodogram) as it was
                self._forget(ids, periodograms=change.what != "results")
        if change.what != "settings":
            self._emit("rows", () if everything else ids)
        current = self.star_id
        touched = current is not None and (everything or current in ids)
        if touched and change.what == "excluded":
            self.data = self.star_data(current)
            self._emit("lightcurve", current)
        elif touched and change.what in _DATA_CHANGES:
            self.load_star(current)
        elif touched and change.what == "verdict":
            self.verdict = self.ledger.verdict(current)
        if change.what in ("verdict", "undo", "redo"):
            for star_id in ids:
                self._emit("verdict", star_id)
        self._emit("history")
        self._emit("change", change)


class StarAnalyser:
    """One worker process that analyses single stars for the desk.

    ``core.batch.analyse_chunk`` runs there, as in the batch's own workers,
    so an analysis that aborts in compiled code takes the worker down, not
    the window: the star gets a failure message and the next call starts a
    fresh worker.  The process starts on the first call (it imports the
    analysis once) and is kept until :meth:`close`.
    """

    #: Our sentence for a star whose worker process stopped.
    LOST = (
        "the process analysing this star stopped (killed, out of memory, or a crash in "
        "compiled code); it is recorded as failed"
    )

    def __init__(self, analyse_fn: str | None = None) -> None:
        self.analyse_fn = analyse_fn  # "module:function" (default: core.analysis.analyse)
        self._pool = None

    def analyse(self, lc, settings) -> Any:
        """The star's ``core.batch.StarOutcome`` (blocks; call it from a worker thread)."""
        from concurrent.futures import ProcessPoolExecutor
        from concurrent.futures.process import BrokenProcessPool
        from multiprocessing import get_context

        from .batch import DEFAULT_ANALYSE, StarOutcome, analyse_chunk
        from .threads import limit_blas_threads

        if self._pool is None:
            self._pool = ProcessPoolExecutor(
                1, mp_context=get_context("spawn"), initializer=limit_blas_threads
            )
        try:
            fn = self.analyse_fn or DEFAULT_ANALYSE
            return self._pool.submit(analyse_chunk, [lc], settings, fn).result()[0]
        except BrokenProcessPool as exc:
            self.close()
            return StarOutcome(lc.star_id, error=self.LOST, detail=repr(exc))

    def close(self) -> None:
        if self._pool is not None:
            self._pool.shutdown(wait=False, cancel_futures=True)
            self._pool = None
