"""The one place the desk calls into ``core``.

Every computation the window shows comes from here: analysis, periodograms,
Fourier fits, the ledger, import and export.  Widgets receive a
:class:`CoreServices` object so that each call site is plain and the calls
are easy to find; nothing here computes anything itself.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

__all__ = ["CoreServices", "PeriodogramView"]


@dataclass(frozen=True)
class PeriodogramView:
    """What the periodogram panel draws."""

    frequency: np.ndarray
    power: np.ndarray
    method: str
    fap_levels: tuple[tuple[float, float], ...] = ()  # (fap, power level)
    candidates: tuple[dict, ...] = ()  # found on this periodogram


class CoreServices:
    """Calls into core used by the desk (real science, no Qt)."""

    def __init__(self) -> None:
        self._fold_cache = None

    # ------------------------------------------------------------ settings
    def default_settings(self):
        from phasewise.core.analysis import AnalysisSettings

        return AnalysisSettings()

    def ledger_settings(self, ledger):
        """The settings the ledger's results were computed with (defaults if none)."""
        from phasewise.core.settings_file import ledger_settings

        if ledger is None or not hasattr(ledger, "analysis_settings"):
            return self.default_settings()
        return ledger_settings(ledger)

    def periodogram_settings(self, settings):
        pg = getattr(settings, "periodogram", None)
        if pg is None:
            from phasewise.core.periodogram import PeriodogramSettings

            pg = PeriodogramSettings()
        return pg

    def with_periodogram_settings(self, settings, pg_settings):
        if hasattr(settings, "periodogram"):
            return dataclasses.replace(settings, periodogram=pg_settings)
        return settings

    def replace_periodogram(self, pg_settings, **changes):
        return dataclasses.replace(pg_settings, **changes)

    # ------------------------------------------------------------- science
    def analyse(self, lc, settings) -> dict[str, Any]:
        from phasewise.core.analysis import analyse

        return analyse(lc, settings).to_dict()

    def compute_periodogram(self, lc, pg_settings) -> PeriodogramView:
        from phasewise.core import periodogram as core_pg

        pgram = core_pg.compute_periodogram(lc, pg_settings)
        found = core_pg.find_candidates(pgram, lc, pg_settings)
        return PeriodogramView(
            np.asarray(pgram.frequency, dtype=float),
            np.asarray(pgram.power, dtype=float),
            str(pgram.method),
            self.fap_levels(pgram, lc, pg_settings),
            tuple(c.to_dict() for c in found),
        )

    def fap_levels(self, pgram, lc, pg_settings) -> tuple[tuple[float, float], ...]:
        """Power levels of FAP 0.1, 0.01 and 0.001 (GLS and multi-harmonic only)."""
        if pgram.method not in ("gls", "mhgls"):
            return ()
        from phasewise.core.folding import power_at_fap
        from phasewise.core.periodogram import candidates

        def fap_of_power(power):
            return candidates._faps(pgram, lc, pg_settings, np.zeros(len(power)), power)[0]

        levels = []
        for fap in (0.1, 0.01, 0.001):
            level = power_at_fap(fap_of_power, fap)
            if level is not None:
                levels.append((fap, level))
        return tuple(levels)

    def spectral_window(self, time, frequency) -> np.ndarray:
        from phasewise.core.periodogram import spectral_window

        return np.asarray(spectral_window(time, frequency), dtype=float)

    def fold_model(self, lc, period, settings=None, band=None, eclipsing=False, result=None):
        """The analysis model at a trial period (``core.folding.fold_model``), cached."""
        if self._fold_cache is None:
            from phasewise.core.folding import FoldModelCache

            self._fold_cache = FoldModelCache()
        return self._fold_cache.get(lc, period, settings, band, eclipsing, result)

    # -------------------------------------------------------------- ledger
    def open_ledger(self, path, readonly: bool = False):
        from phasewise.core.ledger import Ledger

        return Ledger.open(Path(path), readonly=readonly)

    def create_ledger(self, path):
        from phasewise.core.ledger import Ledger

        return Ledger.create(Path(path))

    def building_ledger(self, path):
        """``Ledger.building``: a new ledger moved into place only if the block succeeds."""
        from phasewise.core.ledger import Ledger

        return Ledger.building(Path(path))

    def open_photometry(self, path, mapping=None):
        from phasewise.core.io import open_photometry

        return open_photometry(Path(path), mapping)

    def raw_preview(self, path, n: int = 20) -> tuple[list[str], list[dict[str, str]]]:
        """Column names and first rows of a table, read with no column roles at all.

        For files whose columns were not recognised: the mapping dialog shows
        them so the person can say which column is which.
        """
        from phasewise.core.io.readers import _open_table

        table, _fmt = _open_table(Path(path), None, None)
        return list(table.columns), table.preview(n)

    def column_mapping(self, **roles):
        from phasewise.core.io import ColumnMapping

        return ColumnMapping(**roles)

    def add_stars(self, ledger, lightcurves, source_file=None) -> int:
        return ledger.add_stars(lightcurves, source_file=source_file)

    def settings_record(self, settings) -> tuple[dict, str]:
        from phasewise.core.settings import settings_hash, settings_to_dict

        return settings_to_dict(settings), settings_hash(settings)

    def record_settings(self, ledger, settings) -> None:
        """Tell the ledger which settings results are computed with (others go stale)."""
        as_dict, digest = self.settings_record(settings)
        ledger.set_analysis_settings(as_dict, digest)

    def store_result(self, ledger, star_id: str, result: dict, settings) -> None:
        digest = result.get("settings_hash") or self.settings_record(settings)[1]
        ledger.store_results([(star_id, digest, result)])

    def store_results(self, ledger, items, settings) -> None:
        """Store ``(star_id, result_dict)`` pairs in one transaction."""
        fallback = self.settings_record(settings)[1]
        ledger.store_results([(sid, r.get("settings_hash") or fallback, r) for sid, r in items])

    def write_catalogue(self, ledger, path, fmt: str | None = None):
        from phasewise.core.export import write_catalogue

        return write_catalogue(ledger, Path(path), format=fmt)

    def analyse_all(self, ledger, star_ids, settings, report=None, cancelled=None) -> None:
        """Analyse stars of a ledger and store the results, in chunks of one transaction."""
        star_ids = list(star_ids)
        chunk: list = []
        for i, star_id in enumerate(star_ids):
            if cancelled is not None and cancelled():
                break
            if report is not None:
                report(i, len(star_ids), f"analysing {star_id}")
            chunk.append((star_id, self.analyse(ledger.lightcurve(star_id), settings)))
            if len(chunk) >= 50:
                self.store_results(ledger, chunk, settings)
                chunk = []
        if chunk:
            self.store_results(ledger, chunk, settings)
        if report is not None:
            report(len(star_ids), len(star_ids), "done")

    def analyse_ledger(self, path, settings, report=None, cancelled=None) -> None:
        """Analyse every unanalysed star of a closed ledger file.

        Uses ``core.batch.analyse_ledger`` (worker processes) when present,
        else analyses star by star here.
        """
        try:
            from phasewise.core.batch import analyse_ledger
        except ImportError:
            analyse_ledger = None
        if analyse_ledger is not None:

            def progress(p) -> None:
                if report is not None and not (cancelled is not None and cancelled()):
                    report(p.done, p.total, f"{p.rate:.1f} stars/s")

            analyse_ledger(Path(path), settings, progress=progress, stop=cancelled)
            return
        ledger = self.open_ledger(path)
        try:
            ids = ledger.stars_needing_analysis(self.settings_record(settings)[1])
            self.analyse_all(ledger, ids, settings, report=report, cancelled=cancelled)
        finally:
            ledger.close()
