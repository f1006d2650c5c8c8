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

    # ------------------------------------------------------------ settings
    def default_settings(self):
        from phasewise.core.analysis import AnalysisSettings

        return AnalysisSettings()

    def ledger_settings(self, ledger):
        """The settings the ledger's results were computed with (defaults if none)."""
        from phasewise.core.settings_file import ledger_settings

        return self.default_settings() if ledger is None else ledger_settings(ledger)

    def periodogram_settings(self, settings):
        """The periodogram part of analysis settings (the defaults before they are known)."""
        if settings is None:
            from phasewise.core.periodogram import PeriodogramSettings

            return PeriodogramSettings()
        return settings.periodogram

    def with_periodogram_settings(self, settings, pg_settings):
        return dataclasses.replace(settings, periodogram=pg_settings)

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
        from phasewise.core.folding import fap_power_levels

        return fap_power_levels(pgram, lc, pg_settings)

    def spectral_window(self, time, frequency) -> np.ndarray:
        from phasewise.core.periodogram import spectral_window

        return np.asarray(spectral_window(time, frequency), dtype=float)

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
        from phasewise.core.io import raw_preview

        return raw_preview(Path(path), n)

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

    def store_results(self, ledger, items, settings) -> None:
        """Store ``(star_id, result_dict)`` pairs in one transaction."""
        fallback = self.settings_record(settings)[1]
        ledger.store_results([(sid, r.get("settings_hash") or fallback, r) for sid, r in items])

    def write_catalogue(self, ledger, path, fmt: str | None = None):
        from phasewise.core.export import write_catalogue

        return write_catalogue(ledger, Path(path), format=fmt)

    def analyse_ledger(self, path, settings, report=None, cancelled=None) -> None:
        """Analyse every unanalysed star of a closed ledger file (``core.batch``, worker processes)."""
        from phasewise.core.batch import analyse_ledger

        def progress(p) -> None:
            if report is not None and not (cancelled is not None and cancelled()):
                report(p.done, p.total, f"{p.rate:.1f} stars/s")

        analyse_ledger(Path(path), settings, progress=progress, stop=cancelled)
