"""Re-analysis from the desk, in worker processes, off the GUI thread.

Every analysis the desk starts runs in another process, so one star that
aborts in compiled code cannot take the window down:

* many stars (``run("stale" | "all")``): the batch engine itself,
  ``core.batch.analyse_ledger``, as ``phasewise analyse`` runs it.  It takes
  the ledger's write lock, so the desk hands the ledger over
  (:meth:`DeskModel.hand_over`, browsing goes on read-only) and takes it back
  at the end, when the ledger reports the new results to every view;
* one star (``star()``, and after points are excluded): the batch's worker
  function in the desk's own worker process (:class:`core.desk.StarAnalyser`);
  the result is stored by the desk and reported by the ledger.
"""

from __future__ import annotations

from PySide6.QtWidgets import QMessageBox

from phasewise.core.desk import StarAnalyser
from phasewise.core.errors import PhasewiseError

__all__ = ["Reanalysis"]

#: Stars per chunk sent to a worker process by a batch run from the desk.
CHUNK = 4


class Reanalysis:
    """The desk's re-analyses (``window.desk``, ``window.workers``, the status bar)."""

    def __init__(self, window) -> None:
        self.window = window
        self.desk = window.desk
        self.analyser = StarAnalyser()
        self.running = None  # the batch run's worker, while the ledger is handed over

    def _say(self, text: str) -> None:
        self.window.statusBar().showMessage(text)

    def star(self, star_id: str | None = None):
        """Re-analyse one star (default: the current one) in the worker process."""
        desk = self.desk
        star_id = star_id or desk.star_id
        if desk.ledger is None or star_id is None or desk.read_only:
            return None
        lc = desk.star_data(star_id).lc
        settings = desk.analysis_settings()
        ledger = desk.ledger

        def done(outcome) -> None:
            if desk.ledger is not ledger:
                return  # another ledger by now: nothing to store it in
            try:
                desk.store_outcomes([outcome])
            except PhasewiseError as exc:
                self._say(f"{star_id}: {exc}")
                return
            word = outcome.error or f"analysed ({outcome.result.get('status', '')})"
            self._say(f"{star_id}: {word}")

        self._say(f"{star_id}: analysing…")
        return self.window.workers.start(
            self.analyser.analyse,
            lc,
            settings,
            on_result=done,
            on_error=lambda msg: self._say(f"{star_id}: {msg}"),
        )

    def exclude(self, indices, exclude: bool) -> None:
        """Exclude (or restore) points of the current star, then re-analyse it."""
        desk = self.desk
        if desk.lc is None or desk.read_only:
            return
        try:
            desk.set_excluded(indices, exclude)
        except PhasewiseError as exc:
            QMessageBox.warning(self.window, "Exclusion not saved", str(exc))
            return
        word = "excluded" if exclude else "restored"
        self._say(f"{desk.star_id}: {len(indices)} points {word}; re-analysing…")
        self.star()

    def run(self, only: str = "all"):
        """Analyse stars with the batch engine: ``"stale"`` (no fresh result) or ``"all"``.

        Returns the worker (None if there is nothing to do).  Results are
        written chunk by chunk, so a cancel keeps what was done.
        """
        from phasewise.core.batch import analyse_ledger

        desk = self.desk
        if desk.ledger is None or desk.read_only or self.running is not None:
            return None
        settings = desk.analysis_settings()
        path, todo = desk.hand_over(only)
        if not todo:
            desk.take_back(path, ())
            self._say("Every star has a fresh result.")
            return None
        self._say(f"Analysing {len(todo)} stars in worker processes; verdicts resume at the end.")

        def work(report=None, cancelled=None):
            def progress(p) -> None:
                report(p.done, p.total, f"{p.rate:.1f} stars/s, {p.failed} failed")

            # small chunks: Cancel (or closing the window) waits only for the few stars
            # in flight, which are written, never for a survey-sized chunk
            return analyse_ledger(
                path, settings, only=only, progress=progress, stop=cancelled, chunk_size=CHUNK
            )

        def finished() -> None:
            self.running = None
            if not self.window.workers.closed:  # a closing window closes the ledger itself
                desk.take_back(path, todo)

        def done(summary) -> None:
            self._say(
                f"Analysed {summary.analysed} stars, {summary.failed} failed"
                + (" (stopped)" if summary.stopped else "")
            )

        self.running = self.window.workers.run_with_progress(
            self.window,
            "Analysing stars",
            work,
            on_result=done,
            on_error=lambda msg: QMessageBox.warning(self.window, "Analysis", msg),
        )
        self.running.signals.finished.connect(finished)
        return self.running

    def close(self) -> None:
        self.analyser.close()
