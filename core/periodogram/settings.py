"""Settings of the period search."""

from __future__ import annotations

from dataclasses import dataclass

from ..validation import require_choice, require_int, require_positive, require_range

__all__ = ["METHODS", "DEFAULT_FMAX", "PeriodogramSettings"]

#: Public periodogram methods (``settings.method``).
METHODS = ("gls", "mhgls", "pdm", "ce")

#: Default highest frequency, cycles/day: a 0.02 d period (fast delta Scuti stars).
DEFAULT_FMAX = 50.0


@dataclass(frozen=True)
class PeriodogramSettings:
    """How to search for periods.

    Parameters
    ----------
    method : {"gls", "mhgls", "pdm", "ce"}
        Generalised Lomb-Scargle, multi-harmonic periodogram, phase
        dispersion minimisation or conditional entropy.
    fmin, fmax : float, optional
        Frequency range in cycles/day.  ``fmin=None`` is one cycle over the
        baseline (1/T); ``fmax=None`` is :data:`DEFAULT_FMAX`, or the
        pseudo-Nyquist frequency of regular sampling if lower
        (:func:`core.periodogram.grid.default_fmax`).
    oversampling : float
        Grid points per peak width 1/T: the step is 1/(oversampling T).
    nterms : int
        Harmonics of the multi-harmonic periodogram (2-6).
    max_frequencies : int
        Largest grid computed without asking; above it
        :class:`~core.errors.GridTooLargeError` is raised.
    n_candidates : int
        Distinct peaks reported as candidates.
    multiband : bool
        With several bands, search one period shared by all bands, each band
        with its own mean and amplitude.  If False only the band with most
        points is used.
    pdm_bins : int
        Phase bins of phase dispersion minimisation.
    ce_phase_bins, ce_mag_bins : int
        Phase and magnitude bins of conditional entropy.
    peak_separation : float
        Candidates closer than this many peak widths 1/T count as one peak
        (2 keeps the side lobes at ~1.5/T of a strong peak out).
    mark_tolerance : float
        Tolerance of the harmonic/subharmonic/alias marks, in units of the
        peak width 1/T.
    max_harmonic : int
        Highest n tried for the marks f = n f_other and f = f_other / n.
    window_threshold : float
        Lowest spectral-window power (of 1 at f = 0) that counts as a window
        peak for alias marks.
    """

    method: str = "gls"
    fmin: float | None = None
    fmax: float | None = None
    oversampling: float = 5.0
    nterms: int = 3
    max_frequencies: int = 1_000_000
    n_candidates: int = 5
    multiband: bool = True
    pdm_bins: int = 10
    ce_phase_bins: int = 10
    ce_mag_bins: int = 5
    peak_separation: float = 2.0
    mark_tolerance: float = 0.5
    max_harmonic: int = 6
    window_threshold: float = 0.25

    def __post_init__(self) -> None:
        require_choice("method", self.method, METHODS)
        if self.fmin is not None:
            require_positive("fmin", self.fmin)
        if self.fmax is not None:
            require_positive("fmax", self.fmax)
        if self.fmin is not None and self.fmax is not None and self.fmin >= self.fmax:
            from ..errors import SettingsError

            raise SettingsError(
                f"got fmin={self.fmin!r} >= fmax={self.fmax!r}; fmin must be below fmax",
                field="fmin",
            )
        require_range("oversampling", self.oversampling, 1, 20)
        require_int("nterms", self.nterms, 1, 6)
        require_int("max_frequencies", self.max_frequencies, 10, None)
        require_int("n_candidates", self.n_candidates, 1, 100)
        if not isinstance(self.multiband, bool):
            from ..errors import SettingsError

            raise SettingsError(
                f"got {self.multiband!r}; expected True or False", field="multiband"
            )
        require_int("pdm_bins", self.pdm_bins, 2, 100)
        require_int("ce_phase_bins", self.ce_phase_bins, 2, 100)
        require_int("ce_mag_bins", self.ce_mag_bins, 2, 100)
        require_range("peak_separation", self.peak_separation, 0.1, 20)
        require_range("mark_tolerance", self.mark_tolerance, 0.01, 5)
        require_int("max_harmonic", self.max_harmonic, 2, 20)
        require_range("window_threshold", self.window_threshold, 0.01, 1)
