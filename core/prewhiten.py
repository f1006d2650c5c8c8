"""Prewhitening: further frequencies beyond the main one, and what they are.

Each step subtracts the fit of every frequency found so far (the main
frequency with its harmonics, each further frequency as one sinusoid; all
frequencies refined together by nonlinear least squares, every band with its
own mean and amplitudes), searches the residuals for the highest peak, and
accepts it while its amplitude signal-to-noise ratio reaches
``snr_threshold``.  The noise is the mean of the residual amplitude spectrum
in a box around the frequency after it has been removed; the threshold 4 is
the criterion of Breger et al. (1993), A&A 271, 482 (citation from memory).

Each accepted frequency is then named, in this order of tests, with the
frequency resolution ``1/T`` (times ``resolution_factor``) as tolerance:

``harmonic``
    ``n f_j`` of an earlier independent frequency (n >= 2), or such a
    harmonic reflected through a peak ``w`` of the spectral window;
``side peak``
    ``k f1 +- delta`` with ``delta`` resolved but below ``side_peak_fraction``
    of ``f1``: a modulation (Blazhko-like) with period ``1/delta`` when
    that repeats :data:`MIN_MODULATION_CYCLES` times in the baseline (a
    closer side peak may be a lobe of a slower change; it gets none); also
    such a side peak reflected through a peak ``w`` of the spectral window
    (``k f1 +- delta +- w``, labelled with the window frequency) when
    ``delta`` is at most :data:`ALIAS_SIDE_PEAK_MAX` and no second mode has
    been found: on nightly sampling the 1 c/d reflection of a side peak can
    be the higher of the two;
``combination``
    ``n f_a + m f_b`` of two earlier independent frequencies;
``independent``
    anything else, except:
``modulation``
    in a star with side peaks, an otherwise independent frequency weaker
    than the strongest side peak.  A modulation is only partly modelled by
    the side peaks found (each harmonic has its multiplet, and the sampling
    window spreads every component), so such a peak cannot be told from
    the modulation's own residual power; it is never reported as a second
    mode.  (A second mode of a modulated star, as in a modulated RRd star,
    is as strong as the side peaks or stronger.)

The threshold accounts for the number of frequencies searched: for
Gaussian noise the amplitude spectrum at one frequency follows a Rayleigh
distribution, so an amplitude k times its mean is exceeded with probability
exp(-pi k^2 / 4) (common practice, no source); over M = (f_max - f_min) T
independent frequencies the false-alarm probability of a step stays at
``step_fap`` when k = sqrt(4 ln(M / step_fap) / pi).  The threshold used is
the larger of that and ``snr_threshold``.

The S/N alone does not hold that false-alarm rate on sparse sampling: the
fitted amplitude at the highest residual peak exceeds the amplitude
spectrum there, and removing the peak lowers the noise around it, so with
100-150 points pure Gaussian noise passed the threshold at most steps.
Each step therefore also needs a false-alarm probability of at most
``step_fap`` for its chi-square reduction: the fraction z of the residual
chi-square that the new sinusoid (refined with the rest) removes, judged
as the main period's peaks are (:func:`core.periodogram.baluev_fap` for
one band, :func:`core.periodogram.f_test_fap` for several) over the
residual search's frequency range, with the points the earlier model left
free.  The points are taken as independent: residuals correlated by a
modulation are signal here (its side peaks are what is looked for).

Peaks at known frequencies are not searched: the harmonics in the model,
every frequency already found, and the reflections of these, of every
harmonic ``n f1`` (n up to ``max_harmonic``) and of zero frequency (the mean
level and slow drifts) through the peaks of the spectral window (``f +- w``,
e.g. the 1 c/d of nightly sampling, 1/yr of seasons), within the
resolution.  Harmonics outside the model may still be found; they are named
``harmonic`` and never reported as a secondary.

The reported secondary (``secondary``) is the strongest independent
frequency; the period ratio is shorter/longer of the main period and that
secondary's: near 0.745 for RRd stars, near 0.72 for double-mode Cepheids
pulsating in the fundamental and first overtone.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np

from .errors import PhasewiseError
from .fourier import FourierSettings, _unpack_input, choose_order, multi_frequency_fit
from .lightcurve import LightCurve
from .validation import finite_or_none, require_int, require_positive, require_range

__all__ = [
    "KINDS",
    "PrewhitenSettings",
    "FoundFrequency",
    "Prewhitening",
    "prewhiten",
    "residual_search",
    "snr_threshold_for",
]

KINDS = ("main", "harmonic", "side peak", "combination", "independent", "modulation")

#: ``search(residual_lightcurve) -> (frequency, power)``, larger power = better.
Search = Callable[[LightCurve], tuple[np.ndarray, np.ndarray]]


@dataclass(frozen=True)
class PrewhitenSettings:
    """How prewhitening searches and when it stops.

    Parameters
    ----------
    max_frequencies : int
        Further frequencies to look for beyond the main one.
    snr_threshold : float
        Lowest amplitude signal-to-noise a frequency needs (Breger et al. 1993).
    step_fap : float
        False-alarm probability allowed per step; raises the threshold with
        the number of frequencies searched (module notes).  1e-3, as the
        main period's threshold (``AnalysisSettings.fap_threshold``).
    noise_box : float
        Half-width (cycles/day) of the box in which the noise is averaged.
    noise_samples : int
        Frequencies sampled in that box.
    main_order : int or None
        Harmonics of the main frequency in the model; None chooses them.
    refine : bool
        Refine all frequencies together at each step.
    resolution_factor : float
        Frequency tolerance in units of ``1/T``.
    max_harmonic : int
        Highest ``n`` tried for harmonics and side peaks.
    max_combination : int
        Highest ``|n|``, ``|m|`` tried for combinations.
    side_peak_fraction : float
        Offsets from ``k f1`` below this fraction of ``f1`` are side peaks.
    alias_candidates, alias_power_fraction
        Besides the highest residual peak, up to ``alias_candidates - 1``
        rival peaks with at least this fraction of its power are reported as
        ``alternatives`` (aliases of the sampling window have near-equal peaks).
    search_oversampling : int
        Oversampling of the default residual search grid; coarser than the
        main search is enough, since the joint fit refines every peak.
    fourier : FourierSettings
        Settings for choosing the main order.
    """

    max_frequencies: int = 5
    snr_threshold: float = 4.0
    step_fap: float = 1e-3
    noise_box: float = 1.0
    noise_samples: int = 100
    main_order: int | None = None
    refine: bool = True
    resolution_factor: float = 1.0
    max_harmonic: int = 10
    max_combination: int = 2
    side_peak_fraction: float = 0.1
    search_oversampling: int = 3
    alias_candidates: int = 3
    alias_power_fraction: float = 0.8
    fourier: FourierSettings = field(default_factory=FourierSettings)

    def __post_init__(self) -> None:
        require_int("max_frequencies", self.max_frequencies, 0, 50)
        require_positive("snr_threshold", self.snr_threshold)
        require_range("step_fap", self.step_fap, 1e-12, 0.5)
        require_positive("noise_box", self.noise_box)
        require_int("noise_samples", self.noise_samples, 10, 100_000)
        if self.main_order is not None:
            require_int("main_order", self.main_order, 1, 30)
        require_range("resolution_factor", self.resolution_factor, 0.1, 10.0)
        require_int("max_harmonic", self.max_harmonic, 2, 100)
        require_int("max_combination", self.max_combination, 1, 10)
        require_range("side_peak_fraction", self.side_peak_fraction, 0.0, 0.5)
        require_int("search_oversampling", self.search_oversampling, 1, 100)
        require_int("alias_candidates", self.alias_candidates, 1, 20)
        require_range("alias_power_fraction", self.alias_power_fraction, 0.0, 1.0)


_opt = finite_or_none  # undefined values leave as None


@dataclass(frozen=True)
class FoundFrequency:
    """One frequency of the final multi-frequency fit.

    ``amplitude`` is the semi-amplitude of its first term in the band with
    most points; ``snr`` is measured on the final residuals; ``label`` names
    it (``f1``, ``f2``, ``2f1``, ``f1+f2``, ``f1+0.0250``); ``step`` is the
    step that found it (0 for the main frequency); ``alternatives`` are the
    rival residual peaks of near-equal power at that step (often aliases).
    """

    frequency: float
    frequency_err: float
    amplitude: float
    snr: float
    kind: str
    label: str
    step: int
    modulation_period: float | None = None
    alternatives: tuple[float, ...] = ()
    fap: float | None = None

    @property
    def period(self) -> float:
        return 1.0 / self.frequency

    def to_dict(self) -> dict[str, Any]:
        return {
            "frequency": float(self.frequency),
            "frequency_err": _opt(self.frequency_err),
            "period": float(self.period),
            "amplitude": float(self.amplitude),
            "snr": _opt(self.snr),
            "kind": self.kind,
            "label": self.label,
            "step": int(self.step),
            "modulation_period": _opt(self.modulation_period),
            "alternatives": [float(x) for x in self.alternatives],
            "fap": _opt(self.fap),
        }


@dataclass(frozen=True)
class Prewhitening:
    """All frequencies found, how the search stopped, and derived periods."""

    frequencies: tuple[FoundFrequency, ...]
    main_order: int
    resolution: float
    stop_reason: str  # "snr", "fap", "limit", "no peak", "too few points", "search failed"
    last_snr: float | None  # of the refused peak, when stopped by SNR
    residual_std: float
    n_points: int
    note: str = ""  # why the search failed, if it did
    threshold: float | None = None  # the S/N threshold used (see the module notes)

    @property
    def independent(self) -> tuple[FoundFrequency, ...]:
        """Main and independent frequencies, strongest first."""
        modes = [f for f in self.frequencies if f.kind in ("main", "independent")]
        return tuple(sorted(modes, key=lambda f: -f.amplitude))

    @property
    def secondaries(self) -> tuple[FoundFrequency, ...]:
        """Independent frequencies other than the main one, strongest first."""
        return tuple(f for f in self.independent if f.kind == "independent")

    @property
    def secondary_periods(self) -> tuple[float, ...]:
        """Periods of the independent frequencies other than the main one."""
        return tuple(f.period for f in self.secondaries)

    @property
    def secondary_period(self) -> float | None:
        periods = self.secondary_periods
        return periods[0] if periods else None

    @property
    def period_ratio(self) -> float | None:
        """Shorter / longer of the main period and the reported secondary's."""
        main = [f for f in self.frequencies if f.kind == "main"]
        second = self.secondary_period
        if not main or second is None:
            return None
        p1 = main[0].period
        return min(p1, second) / max(p1, second)

    @property
    def modulation_period(self) -> float | None:
        """Mean modulation period of the side peaks that time one, if any."""
        periods = [
            f.modulation_period
            for f in self.frequencies
            if f.kind == "side peak" and f.modulation_period is not None
        ]
        return float(np.mean(periods)) if periods else None

    def to_dict(self) -> dict[str, Any]:
        return {
            "frequencies": [f.to_dict() for f in self.frequencies],
            "main_order": int(self.main_order),
            "resolution": float(self.resolution),
            "stop_reason": self.stop_reason,
            "note": self.note,
            "last_snr": _opt(self.last_snr),
            "residual_std": float(self.residual_std),
            "n_points": int(self.n_points),
            "secondary_periods": [float(p) for p in self.secondary_periods],
            "secondary_period": _opt(self.secondary_period),
            "period_ratio": _opt(self.period_ratio),
            "modulation_period": _opt(self.modulation_period),
            "threshold": _opt(self.threshold),
        }


def snr_threshold_for(n_independent: float, settings: PrewhitenSettings) -> float:
    """S/N threshold for ``n_independent`` frequencies searched (module notes)."""
    m = max(float(n_independent), 1.0)
    k = np.sqrt(4.0 * np.log(m / settings.step_fap) / np.pi) if m > settings.step_fap else 0.0
    return float(max(settings.snr_threshold, k))


# ------------------------------------------------------------------- search
def residual_search(oversampling: float = 3, periodogram=None) -> Search:
    """The default residual search: a generalized Lomb–Scargle periodogram.

    On the frequency range (and band combination) of ``periodogram``, a
    :class:`~core.periodogram.PeriodogramSettings` (the defaults if None),
    from 2/T up (two cycles in the baseline T at least), with
    ``oversampling`` points per peak width.  The residuals keep the
    points of the light curve, so every step after the first reuses the
    weight terms of the transform (:func:`core.periodogram.kernels.gls.weight_terms`).
    """
    from .periodogram import PeriodogramSettings, compute_periodogram

    base = PeriodogramSettings() if periodogram is None else periodogram
    settings = replace(base, method="gls", oversampling=oversampling)

    def search(residual: LightCurve) -> tuple[np.ndarray, np.ndarray]:
        # a further period must repeat at least twice in the baseline
        # (fewer cycles cannot tell it from a drift)
        here = settings
        baseline = residual.baseline
        if baseline > 0 and (settings.fmin or 0.0) < 2.0 / baseline:
            if settings.fmax is None or settings.fmax > 2.0 / baseline:
                here = replace(settings, fmin=2.0 / baseline)
        pg = compute_periodogram(residual, here)
        return np.asarray(pg.frequency), np.asarray(pg.power)

    return search


def _noise(t, r, sw, centre, box, samples):
    """Mean residual amplitude spectrum in a box around ``centre``.

    Weighted amplitude spectrum normalised so that a sinusoid of amplitude
    A, well sampled in phase, shows A: ``2 |sum w r exp(-2 pi i f t)| / sum w``.
    The sums on the evenly spaced frequencies are one small non-uniform FFT
    (:func:`core.periodogram.kernels.nufft.trig_sums`; its sign of the
    exponent does not change the modulus of a sum with real strengths), so
    the cost grows with the points, not with points x frequencies.
    """
    from .periodogram.kernels.nufft import trig_sums

    low = max(centre - box, 0.5 * box / samples)
    high = centre + box
    step = (high - low) / (samples - 1)
    w = sw**2
    sums = trig_sums(t - t.mean(), w * r, low, step, samples)
    return float(np.mean(2.0 * np.abs(sums) / w.sum()))


def _top_peaks(grid, power, allowed, resolution, settings) -> list[float]:
    """The highest residual peak and rivals within ``alias_power_fraction`` of it."""
    ok = allowed & np.isfinite(power)
    inner = np.zeros(grid.size, bool)
    inner[1:-1] = (power[1:-1] >= power[:-2]) & (power[1:-1] >= power[2:])
    inner[0] = grid.size > 1 and power[0] >= power[1]
    inner[-1] = grid.size > 1 and power[-1] >= power[-2]
    idx = np.flatnonzero(ok & inner)
    if idx.size == 0:
        idx = np.flatnonzero(ok)[:1]
    if idx.size > 64:  # only the strongest few matter
        idx = idx[np.argpartition(-power[idx], 63)[:64]]
    idx = idx[np.argsort(-power[idx], kind="stable")]
    chosen: list[float] = []
    for i in idx:
        if len(chosen) >= settings.alias_candidates:
            break
        if chosen and power[i] < settings.alias_power_fraction * power[idx[0]]:
            break
        if all(abs(grid[i] - c) >= resolution for c in chosen):
            chosen.append(float(grid[i]))
    return chosen


def _vertex(grid: np.ndarray, power: np.ndarray, peak: float) -> float:
    """The vertex of the parabola through a grid peak and its two neighbours.

    A start for the joint fit closer to the optimum than the grid point
    (within half a step of it): the Newton iterations that follow converge
    to the same frequency (to well below its standard error) in about one
    evaluation fewer.  The grid point itself where a neighbour is missing
    or the three powers do not bend down.
    """
    i = int(np.searchsorted(grid, peak))
    if not (0 < i < grid.size - 1 and grid[i] == peak):
        return peak
    left, mid, right = power[i - 1], power[i], power[i + 1]
    bend = left - 2.0 * mid + right
    if not (np.isfinite(bend) and bend < 0):
        return peak
    offset = 0.5 * (left - right) / bend  # in grid steps
    return float(peak + min(max(offset, -0.5), 0.5) * (grid[i + 1] - grid[i]))


def _near_mask(grid: np.ndarray, centres, tolerance: float) -> np.ndarray:
    """``|grid - x| < tolerance`` for any ``x`` of ``centres``, as a boolean mask.

    On an increasing grid each centre touches one short run of it: the run
    is found by bisection (with one grid point to spare on either side) and
    the exact test is made there only, so the mask is the one the plain
    test over the whole grid gives, at a cost independent of the grid size.
    """
    masked = np.zeros(grid.size, bool)
    centres = np.asarray(centres, dtype=float)
    if grid.size == 0 or centres.size == 0:
        return masked
    if grid.size > 1 and not np.all(grid[1:] > grid[:-1]):
        for x in centres:  # not increasing: the plain test
            masked |= np.abs(grid - x) < tolerance
        return masked
    lo = np.maximum(np.searchsorted(grid, centres - tolerance) - 1, 0)
    hi = np.minimum(np.searchsorted(grid, centres + tolerance) + 1, grid.size)
    length = np.maximum(hi - lo, 0)
    if not length.any():
        return masked
    # every run's indices at once: run k holds lo[k] .. hi[k] - 1
    owner = np.repeat(np.arange(centres.size), length)
    first = np.cumsum(length) - length
    index = lo[owner] + np.arange(owner.size) - first[owner]
    near = np.abs(grid[index] - centres[owner]) < tolerance
    masked[index[near]] = True
    return masked


def _near_any(f: float, known: list[float], tolerance: float) -> bool:
    return any(abs(f - k) < tolerance for k in known)


def _label_independent(index: int) -> str:
    return f"f{index}"


#: Largest offset (c/d) from a harmonic of a side peak seen through a window
#: peak (module notes): modulation periods of 10 d and more (Blazhko periods
#: run from about ten days to years; from memory).  Closer to a harmonic than
#: this by chance, through one of a few window peaks, a second mode rarely is.
ALIAS_SIDE_PEAK_MAX = 0.1


#: Fewest modulation cycles in the baseline T for a side peak to give a
#: modulation period.  A change of amplitude or phase slower than the
#: baseline spreads over the main peak's window lobes, whose first two side
#: lobes lie near 1.4/T and 2.5/T (those of sinc(f T); common practice, no
#: source): a side peak closer to ``k f1`` than 3/T may be such a lobe, so
#: it shows a modulation but not its period.
MIN_MODULATION_CYCLES = 3.0


def _side_peak(f, f1, resolution, settings, limit):
    """``(label, modulation period)`` when ``f`` is ``k f1 +- delta`` (module notes), else None.

    The period is None when ``delta`` repeats fewer than
    :data:`MIN_MODULATION_CYCLES` times in the baseline.
    """
    k = max(int(round(f / f1)), 1)
    delta = f - k * f1
    if k <= settings.max_harmonic and resolution <= abs(delta) < limit:
        sign = "+" if delta > 0 else "-"
        head = "f1" if k == 1 else f"{k}f1"
        baseline = settings.resolution_factor / resolution
        timed = abs(delta) * baseline >= MIN_MODULATION_CYCLES
        return f"{head}{sign}{abs(delta):.4f}", (1 / abs(delta) if timed else None)
    return None


def _classify(freqs, resolution, main_frequency, settings, window_freqs=()):
    """Kinds and labels, in order of discovery; see the module text."""
    kinds, labels, mods = ["main"], ["f1"], [None]
    independent = [(1, freqs[0])]  # (label index, frequency)
    f1 = main_frequency
    for f in freqs[1:]:
        kind, label, mod = None, None, None
        for idx, fj in independent:
            n = int(round(f / fj))
            if 2 <= n <= settings.max_harmonic and abs(f - n * fj) < resolution:
                kind, label = "harmonic", f"{n}f{idx}"
                break
        if kind is None:
            side = _side_peak(f, f1, resolution, settings, settings.side_peak_fraction * f1)
            if side is not None:
                kind, (label, mod) = "side peak", side
        for w in window_freqs if kind is None else ():
            # a harmonic of a known mode seen through a window peak
            for idx, fj in independent:
                for shifted, sign in ((f - w, "+"), (f + w, "-")):
                    n = int(round(shifted / fj))
                    if kind is None and 2 <= n <= settings.max_harmonic:
                        if abs(shifted - n * fj) < resolution:
                            kind, label = "harmonic", f"{n}f{idx}{sign}{w:.4f}"
        if kind is None and len(independent) == 1:
            # only beside a single mode: the combinations of two modes and
            # their reflections are so many that one falls there by chance
            limit = min(settings.side_peak_fraction * f1, ALIAS_SIDE_PEAK_MAX)
            for w in window_freqs:
                for shifted, sign in ((f - w, "+"), (f + w, "-")):
                    side = (
                        _side_peak(shifted, f1, resolution, settings, limit)
                        if shifted > 0
                        else None
                    )
                    if side is not None and kind is None:
                        kind, mod = "side peak", side[1]
                        label = f"{side[0]}{sign}{w:.4f}"
        if kind is None and len(independent) >= 2:
            best = None
            span = range(-settings.max_combination, settings.max_combination + 1)
            for ia, (la, fa) in enumerate(independent):
                for lb, fb in independent[ia + 1 :]:
                    for n in span:
                        for m in span:
                            if n == 0 or m == 0:
                                continue
                            if abs(f - (n * fa + m * fb)) < resolution:
                                cost = abs(n) + abs(m)
                                if best is None or cost < best[0]:
                                    best = (cost, _combination_label(n, la, m, lb))
            if best is not None:
                kind, label = "combination", best[1]
        if kind is None:
            kind = "independent"
            label = _label_independent(len(independent) + 1)
            independent.append((len(independent) + 1, f))
        kinds.append(kind)
        labels.append(label)
        mods.append(mod)
    return kinds, labels, mods


def _combination_label(n: int, la: int, m: int, lb: int) -> str:
    def term(c: int, idx: int) -> str:
        size = "" if abs(c) == 1 else str(abs(c))
        return f"{size}f{idx}"

    if n < 0 < m:
        n, la, m, lb = m, lb, n, la
    sign = "+" if m > 0 else "-"
    head = term(n, la) if n > 0 else "-" + term(n, la)
    return f"{head}{sign}{term(m, lb)}"


# ------------------------------------------------------------------ driver
def prewhiten(
    lc: Any,
    frequency: float,
    settings: PrewhitenSettings | None = None,
    search: Search | None = None,
    windows=None,
) -> Prewhitening:
    """Find further significant frequencies after the main one.

    Parameters
    ----------
    lc : LightCurve
        All good points are used; every band has its own mean and amplitudes.
    frequency : float
        The main frequency (cycles/day), ideally already refined.
    settings : PrewhitenSettings, optional
    search : callable, optional
        ``search(residual_lightcurve) -> (frequency, power)``; default the
        generalized Lomb–Scargle of :func:`core.periodogram.compute_periodogram`
        on its default range with ``search_oversampling``.
    windows : sequence of WindowPeak, optional
        Spectral-window peaks whose reflections of known frequencies are not
        searched; by default those of the light curve's times.

    Returns
    -------
    Prewhitening
    """
    settings = settings or PrewhitenSettings()
    search = search or residual_search(settings.search_oversampling)
    f_main = float(frequency)
    if not np.isfinite(f_main) or f_main <= 0:
        raise PhasewiseError(f"got {frequency!r}; expected a frequency > 0", field="frequency")
    t, m, e, labels = _unpack_input(lc)
    names, inverse, counts = np.unique(labels, return_inverse=True, return_counts=True)
    ranked = np.lexsort((names, -counts))  # most points first, then by name
    band_names = [str(n) for n in names[ranked]]
    rank_of = np.empty(names.size, dtype=int)
    rank_of[ranked] = np.arange(names.size)
    bidx = rank_of[inverse.reshape(-1)] if t.size else np.zeros(0, int)
    star_id = getattr(lc, "star_id", "residual")
    time_scale = getattr(lc, "time_scale", "JD")
    baseline = float(np.ptp(t)) if t.size > 1 else 0.0
    if baseline <= 0:
        raise PhasewiseError("prewhitening needs a time baseline > 0", field="time")
    resolution = settings.resolution_factor / baseline
    primary = bidx == 0
    sw = 1.0 / e
    box = settings.noise_box

    order = settings.main_order
    if order is None:
        try:
            order = choose_order(t[primary], m[primary], e[primary], f_main, settings.fourier).order
        except PhasewiseError:
            return Prewhitening((), 0, resolution, "too few points", None, float("nan"), t.size)
    freqs, orders = [f_main], [order]
    steps = [0]
    alternatives: list[tuple[float, ...]] = [()]
    step_faps: list[float | None] = [None]
    fit = multi_frequency_fit(t, m, e, freqs, orders, bidx, refine=settings.refine)
    fit = _keep_near(fit, t, m, e, freqs, orders, bidx, resolution, settings)
    if windows is None:
        from .periodogram import PeriodogramSettings, candidate_windows

        windows = candidate_windows(t, PeriodogramSettings())
    window_freqs = [w.frequency for w in windows]
    stop, last_snr, note, threshold = "limit", None, "", None
    last_noise: tuple = (None, None, None)
    for step in range(1, settings.max_frequencies + 1):
        n_params = len(freqs) + len(band_names) * (1 + 2 * sum(orders))
        if t.size - n_params - 3 < 2 * len(band_names) + 1:
            stop = "too few points"
            break
        residual = LightCurve(star_id, t, fit.residuals, e, band=labels, time_scale=time_scale)
        try:
            grid, power = search(residual)
        except PhasewiseError as exc:  # e.g. a grid too large to compute unasked
            stop, note = "search failed", exc.reason
            break
        grid, power = np.asarray(grid, float), np.asarray(power, float)
        if threshold is None and grid.size > 1:
            threshold = snr_threshold_for((grid[-1] - grid[0]) * baseline, settings)
        f_now = float(fit.frequencies[0])
        in_model = [k * f_now for k in range(1, orders[0] + 1)] + list(fit.frequencies[1:])
        # reflections through the sampling window of every harmonic and found
        # frequency (a harmonic itself may still be found, and is named so)
        harmonics = [k * f_now for k in range(1, settings.max_harmonic + 1)]
        # 0 stands for the mean level and slow drifts: the window's own peaks
        # (1 c/d, 1/yr, ...) are their reflections
        reflections = [
            x
            for fk in [0.0, *harmonics, *fit.frequencies[1:]]
            for w in window_freqs
            for x in (fk + w, abs(fk - w))
        ]
        masked = _near_mask(grid, [*in_model, *reflections], resolution)
        candidates = np.flatnonzero(~masked & np.isfinite(power))
        if candidates.size == 0:
            stop = "no peak"
            break
        peaks = _top_peaks(grid, power, ~masked, resolution, settings)
        start = _vertex(grid, power, peaks[0]) if settings.refine else peaks[0]
        trial_freqs = [*fit.frequencies, start]
        trial_orders = [*orders, 1]
        trial = multi_frequency_fit(
            t, m, e, trial_freqs, trial_orders, bidx, refine=settings.refine
        )
        trial = _keep_near(trial, t, m, e, trial_freqs, trial_orders, bidx, resolution, settings)
        # rival peaks of near-equal power, often aliases through the sampling
        # window; a joint-fit chi-square does not tell them apart reliably, so
        # they are reported for the classifier rather than chosen between here
        others = tuple(peaks[1:])
        amp = trial.term_amplitude(0, sum(orders))
        f_found = float(trial.frequencies[-1])
        if f_found < 2.0 / baseline or _near_any(f_found, reflections, resolution):
            # refined onto a drift (under two cycles) or an alias of a known
            # frequency: the strongest residual signal is not a further mode
            stop = "no peak"
            break
        noise = _noise(
            t[primary], trial.residuals[primary], sw[primary], f_found, box, settings.noise_samples
        )
        snr = amp / noise if noise > 0 else np.inf
        if snr < (threshold or settings.snr_threshold):
            stop, last_snr = "snr", float(snr)
            break
        fap = _step_fap(fit, trial, t, e, bidx, grid, n_params)
        if fap > settings.step_fap:
            stop, last_snr = "fap", float(snr)
            break
        fit, freqs, orders = trial, list(trial.frequencies), trial_orders
        last_noise = (fit, f_found, noise)
        steps.append(step)
        alternatives.append(others)
        step_faps.append(fap)

    # final figures from the final joint fit
    final = [float(x) for x in fit.frequencies]
    kinds, names_, mods = _classify(final, resolution, final[0], settings, window_freqs)
    found = []
    term = 0
    for j, fj in enumerate(final):
        amp = fit.term_amplitude(0, term)
        term += orders[j]
        if last_noise[0] is fit and last_noise[1] == fj:
            noise = last_noise[2]  # the accepted step's own: same residuals, same box
        else:
            noise = _noise(
                t[primary], fit.residuals[primary], sw[primary], fj, box, settings.noise_samples
            )
        found.append(
            FoundFrequency(
                frequency=fj,
                frequency_err=float(fit.frequencies_err[j]),
                amplitude=amp,
                snr=amp / noise if noise > 0 else float("inf"),
                kind=kinds[j],
                label=names_[j],
                step=steps[j],
                modulation_period=mods[j],
                alternatives=alternatives[j],
                fap=step_faps[j],
            )
        )
    found = _modulation_residue(found)
    n_params = len(final) + len(band_names) * (1 + 2 * sum(orders))
    resid_std = float(np.sqrt(np.sum(fit.residuals**2) / max(t.size - n_params, 1)))
    return Prewhitening(
        frequencies=tuple(found),
        main_order=int(orders[0]),
        resolution=resolution,
        stop_reason=stop,
        last_snr=last_snr,
        residual_std=resid_std,
        n_points=int(t.size),
        note=note,
        threshold=threshold,
    )


def _modulation_residue(found: list[FoundFrequency]) -> list[FoundFrequency]:
    """Independent frequencies weaker than the strongest side peak become ``modulation``."""
    side = [f.amplitude for f in found if f.kind == "side peak"]
    if not side:
        return found
    strongest = max(side)
    return [
        replace(f, kind="modulation") if f.kind == "independent" and f.amplitude < strongest else f
        for f in found
    ]


def _step_fap(before, after, t, err, bidx, grid, n_params) -> float:
    """False-alarm probability of one step's chi-square reduction (module notes)."""
    from .periodogram import baluev_fap, f_test_fap

    chi2_before = float(np.sum((before.residuals / err) ** 2))
    chi2_after = float(np.sum((after.residuals / err) ** 2))
    if not chi2_before > 0:
        return 1.0
    z = min(max(1.0 - chi2_after / chi2_before, 0.0), 1.0)
    # the points the earlier model left free
    free = float(err.size - n_params)
    n_bands = int(bidx.max()) + 1 if bidx.size else 1
    fmax = float(grid[-1])
    if n_bands == 1:
        return float(baluev_fap(z, fmax, t, err, n_effective=free))
    m_independent = (fmax - float(grid[0])) * float(np.ptp(t))
    # the means are among the parameters already taken from the free points
    return float(f_test_fap(z, free, 2 * n_bands, 0, m_independent))


def _keep_near(fit, t, m, e, start, orders, bidx, resolution, settings):
    """Undo a refinement that moved any frequency by more than the resolution."""
    if not settings.refine:
        return fit
    moved = np.abs(np.asarray(fit.frequencies) - np.asarray(start)) > resolution
    if fit.success and not moved.any():
        return fit
    return multi_frequency_fit(t, m, e, start, orders, bidx, refine=False)
