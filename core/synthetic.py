"""Seeded synthetic skies: the demo survey, the test fixtures and the benchmarks.

Everything here is invented and pure numpy: one fictional site, one fictional
globular cluster with its field, and light curves of the usual classes of
variable stars drawn from templates with parameters typical of each class.
The same seed always gives the same output (each star has its own random
stream spawned from the seed, so the stars do not depend on one another).

Four parts:

* a cadence model (:func:`make_cadence`): nightly visits inside an observing
  window around the target's transit, seasonal gaps, allocated observing
  runs, weather losses with correlated bad spells;
* class templates (:func:`draw_star`): Fourier series for pulsators, Gaussian
  dips in flux for eclipsing binaries, quasi-periodic sums for long-period
  variables, with the sources of the parameter ranges beside each one;
* a noise model (:func:`noise_sigma`): photon, sky and read noise plus a
  floor, so the error grows with magnitude;
* two front ends: :func:`make_survey` (multi-band light curves and a truth
  table) and :func:`synthetic_field` (many stars on one set of epochs, for
  batched periodograms and benchmarks).

Times are HJD in days.  The heliocentric correction is not modelled: the
epochs are drawn directly on the HJD axis (good enough for invented data; the
light-time effect only shifts a season by a few minutes).

Sources: "JK96" is Jurcsik & Kovács 1996; "M07" Morgan, Wahl & Wieckhorst
2007; "C99" Chaboyer 1999; "B07" Benedict et al. 2007; "S16" Soszyński et al.
2016; "MFM09" Matsunaga, Feast & Menzies 2009; "McN11" McNamara 2011; "P24"
Poro et al. 2024 (all in the project's REFERENCES.md).  "From memory" marks a
value recalled without a source at hand; it shapes invented data only and is
never used as a test oracle.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import asdict, dataclass, field
from typing import Any

import numpy as np

from .errors import SettingsError
from .lightcurve import LightCurve, StarMeta
from .periodogram.grid import sampling_step

__all__ = [
    "SITE",
    "CLUSTER",
    "CLASS_WEIGHTS",
    "BANDS",
    "Site",
    "Cluster",
    "CadenceSettings",
    "NoiseModel",
    "StarTruth",
    "SyntheticStar",
    "SyntheticSurvey",
    "SyntheticField",
    "make_cadence",
    "noise_sigma",
    "class_counts",
    "draw_star",
    "make_survey",
    "synthetic_field",
    "truth_table",
    "BATTERY_CADENCES",
    "BATTERY_CLASSES",
    "SPACE_NOISE",
    "battery_cadence",
    "battery_star",
    "battery_star_with_model",
    "period_determinable",
    "eclipses_sampled",
    "MIN_ECLIPSES_SAMPLED",
    "DETECTION_SNR",
]

BANDS = ("V", "I")


# ----------------------------------------------------------------- scenario
@dataclass(frozen=True)
class Site:
    """An invented observatory."""

    name: str = "Cerro Alto Vigil Observatory"
    latitude: float = -29.5  # degrees
    longitude: float = -70.7  # degrees, east positive
    height: float = 2300.0  # metres


@dataclass(frozen=True)
class Cluster:
    """An invented globular cluster and its field."""

    name: str = "Caldera Cluster"
    id_prefix: str = "CAL-V"
    ra: float = 201.3725  # degrees, invented
    dec: float = -38.6410  # degrees, invented
    distance_modulus: float = 15.30  # true (m - M)_0, invented
    ebv: float = 0.10  # E(B-V), invented
    feh_zw: float = -1.55  # [Fe/H] on the Zinn & West scale, invented
    radius_arcmin: float = 6.0  # members lie mostly inside this

    @property
    def a_v(self) -> float:
        # R_V = 3.1 (Cardelli, Clayton & Mathis 1989)
        return 3.1 * self.ebv

    @property
    def e_vi(self) -> float:
        # E(V-I) ~ 1.28 E(B-V): from memory
        return 1.28 * self.ebv


SITE = Site()
CLUSTER = Cluster()

#: Stars per class in a 300-star field (class, subtype): mostly RR Lyrae, a
#: few of the rarer pulsators, a good number of binaries, a sizeable share of
#: non-variables.  Proportions typical of a globular-cluster variable census,
#: from memory.
CLASS_WEIGHTS: dict[tuple[str, str], int] = {
    ("RRab", ""): 95,
    ("RRc", ""): 40,
    ("RRd", ""): 6,
    ("DCEP", "F"): 4,
    ("DCEP", "1O"): 3,
    ("T2CEP", "BLHER"): 2,
    ("T2CEP", "WVIR"): 2,
    ("T2CEP", "RVTAU"): 1,
    ("ACEP", "F"): 1,
    ("DSCT", "SXPHE"): 9,
    ("DSCT", "HADS"): 3,
    ("EW", ""): 25,
    ("EB", ""): 10,
    ("EA", ""): 12,
    ("LPV", "MIRA"): 3,
    ("LPV", "SR"): 4,
    ("NONVAR", ""): 80,
}


def class_counts(n_stars: int) -> dict[tuple[str, str], int]:
    """Stars per (class, subtype) for ``n_stars``, largest-remainder rounding."""
    if n_stars < 1:
        raise SettingsError(f"n_stars must be at least 1, got {n_stars}", field="n_stars")
    keys = list(CLASS_WEIGHTS)
    weights = np.array([CLASS_WEIGHTS[k] for k in keys], dtype=float)
    exact = weights / weights.sum() * n_stars
    counts = np.floor(exact).astype(int)
    order = np.argsort(-(exact - counts), kind="stable")
    counts[order[: n_stars - counts.sum()]] += 1
    return {k: int(c) for k, c in zip(keys, counts, strict=True)}


# ------------------------------------------------------------------ cadence
@dataclass(frozen=True)
class CadenceSettings:
    """How the field is observed.

    The target is observable for some months a year; inside each season the
    telescope is allocated ``runs_per_season`` runs of a few nights.  On each
    clear night the field is visited ``v_per_night`` (V) and ``i_per_night``
    (I) times on average inside the overlap of the dark night and the hour
    angles ``±max_hour_angle`` around transit.
    """

    start_hjd: float = 2460680.5  # start of the first season's year, invented
    n_seasons: int = 3
    runs_per_season: int = 5
    run_nights: tuple[int, int] = (3, 6)  # min, max nights per run
    v_per_night: float = 2.2
    i_per_night: float = 1.0
    max_hour_angle: float = 3.5  # hours; airmass below ~2 (from memory)
    min_window: float = 1.0  # hours of usable window for a night to count
    p_bad_after_good: float = 0.18  # weather: chance a clear night is followed by a bad one
    p_bad_after_bad: float = 0.55  # bad spells persist (correlated weather)
    partial_night: float = 0.15  # chance a clear night loses part of its window

    def __post_init__(self) -> None:
        if self.n_seasons < 1:
            raise SettingsError("n_seasons must be at least 1", field="n_seasons")
        if self.run_nights[0] < 1 or self.run_nights[1] < self.run_nights[0]:
            raise SettingsError(
                "run_nights must be (min, max) with 1 <= min <= max", field="run_nights"
            )


def _transit_offset_hours(jd_midnight: np.ndarray, ra_deg: float) -> np.ndarray:
    """Hour of the target's transit relative to local midnight (−12..12).

    Local sidereal time at local midnight is about 12 h at the March equinox
    and gains 24 h per year (approximate, good to some minutes; common
    practice, no source).
    """
    days_from_equinox = jd_midnight - 2451623.8  # 2000 March 20, near the equinox
    lst_midnight = 12.0 + 24.0 * (days_from_equinox / 365.2422)
    return (ra_deg / 15.0 - lst_midnight + 12.0) % 24.0 - 12.0


def _dark_half_hours(jd_midnight: np.ndarray, latitude: float) -> np.ndarray:
    """Half-length of the astronomical night in hours (longer in the local winter)."""
    # ~9.3 h to ~12.5 h of dark at |lat| 30 deg: from memory
    winter_solstice = 172.0 if latitude < 0 else 355.0
    doy = (jd_midnight - 2451544.5) % 365.2422
    return 5.45 + 0.8 * np.cos(2.0 * np.pi * (doy - winter_solstice) / 365.2422)


def _weather(rng: np.random.Generator, n: int, settings: CadenceSettings) -> np.ndarray:
    """Clear (True) or lost (False) for ``n`` consecutive nights, as a two-state Markov chain."""
    clear = np.empty(n, dtype=bool)
    bad = rng.random() < 0.25
    draws = rng.random(n)
    for k in range(n):
        p_bad = settings.p_bad_after_bad if bad else settings.p_bad_after_good
        bad = draws[k] < p_bad
        clear[k] = not bad
    return clear


def make_cadence(
    rng: np.random.Generator,
    settings: CadenceSettings = CadenceSettings(),
    site: Site = SITE,
    ra: float = CLUSTER.ra,
) -> tuple[np.ndarray, np.ndarray]:
    """Epochs of one field: sorted HJD times and the band of each visit.

    Returns
    -------
    time : ndarray of float
        HJD, days, sorted.
    band : ndarray of str
        "V" or "I" per epoch.
    """
    # local midnight in JD: 0h UT is JD x.5; the site is west of Greenwich
    midnight_frac = 0.5 - site.longitude / 360.0
    times: list[np.ndarray] = []
    bands: list[np.ndarray] = []
    for season in range(settings.n_seasons):
        year0 = np.floor(settings.start_hjd + 365.25 * season) + midnight_frac % 1.0
        nights = year0 + np.arange(366)
        transit = _transit_offset_hours(nights, ra)
        dark = _dark_half_hours(nights, site.latitude)
        lo = np.maximum(transit - settings.max_hour_angle, -dark)
        hi = np.minimum(transit + settings.max_hour_angle, dark)
        usable = np.flatnonzero(hi - lo >= settings.min_window)
        if usable.size == 0:
            continue
        # the season is the longest run of usable nights in this year
        splits = np.flatnonzero(np.diff(usable) > 1) + 1
        segment = max(np.split(usable, splits), key=len)
        chosen = np.zeros(nights.size, dtype=bool)
        # one run in each equal slice of the season, so runs spread over it
        edges = np.linspace(segment[0], segment[-1] + 1, settings.runs_per_season + 1)
        for a, b in zip(edges[:-1], edges[1:], strict=True):
            length = int(rng.integers(settings.run_nights[0], settings.run_nights[1] + 1))
            first = int(rng.integers(int(a), max(int(a) + 1, int(b) - length + 1)))
            chosen[first : first + length] = True
        chosen &= np.isin(np.arange(nights.size), segment)
        idx = np.flatnonzero(chosen)
        idx = idx[_weather(rng, idx.size, settings)]
        for k in idx:
            start, stop = lo[k], hi[k]
            if rng.random() < settings.partial_night:
                cut = rng.uniform(0.3, 0.7) * (stop - start)
                start, stop = (start + cut, stop) if rng.random() < 0.5 else (start, stop - cut)
            n_v = rng.poisson(settings.v_per_night - 1.0) + 1
            n_i = rng.poisson(settings.i_per_night)
            hours = rng.uniform(start, stop, n_v + n_i)
            times.append(nights[k] + hours / 24.0)
            bands.append(np.array(["V"] * n_v + ["I"] * n_i, dtype=object))
    if not times:
        raise SettingsError("the cadence settings leave no usable night", field="cadence")
    time = np.concatenate(times)
    band = np.concatenate(bands)
    order = np.argsort(time, kind="stable")
    return time[order], band[order]


# -------------------------------------------------------------------- noise
@dataclass(frozen=True)
class NoiseModel:
    """CCD noise of one invented camera: photon + sky + read noise, plus a floor.

    ``zero_point`` is the magnitude giving one photo-electron per exposure;
    chosen so that sigma is ~0.006 mag at V = 15 and ~0.1 mag at V = 20.5
    (typical of a 1-m class telescope, from memory).
    """

    zero_point: dict[str, float] = field(default_factory=lambda: {"V": 27.4, "I": 26.8})
    sky_electrons: dict[str, float] = field(default_factory=lambda: {"V": 3000.0, "I": 6500.0})
    read_noise: float = 8.0  # electrons per aperture (summed over pixels), invented
    floor: float = 0.004  # mag; flat-field and calibration limit, from memory
    error_jitter: float = 0.06  # relative scatter of the reported errors around the true sigma


def noise_sigma(
    mag: np.ndarray, band: np.ndarray | str, noise: NoiseModel = NoiseModel()
) -> np.ndarray:
    """One-sigma magnitude noise at magnitude ``mag`` in ``band``.

    sigma = sqrt((1.0857 sqrt(N + S + R^2) / N)^2 + floor^2), N the star's
    photo-electrons, S the sky's, R the read noise (the CCD equation).
    """
    mag = np.asarray(mag, dtype=float)
    band = np.broadcast_to(np.asarray(band, dtype=object), mag.shape)
    zp = np.where(band == "I", noise.zero_point["I"], noise.zero_point["V"])
    sky = np.where(band == "I", noise.sky_electrons["I"], noise.sky_electrons["V"])
    star = 10.0 ** (-0.4 * (mag - zp))
    photon = 1.0857 * np.sqrt(star + sky + noise.read_noise**2) / star
    return np.sqrt(photon**2 + noise.floor**2)


# ---------------------------------------------------------------- templates
Model = Callable[[np.ndarray, np.ndarray], np.ndarray]  # (time, band) -> mag


@dataclass(frozen=True)
class StarTruth:
    """What was injected into one synthetic star.

    ``epoch`` is the time of maximum light for pulsators and of primary
    minimum for eclipsing binaries.  ``amplitude_*`` is the peak-to-peak of
    the main mode's mean cycle (eclipse depth for binaries).  ``mean_*`` is
    the time-averaged magnitude of the noise-free model.  ``R21`` and
    ``phi31`` (sine form, V) are given for Fourier-template classes.
    ``period_mean`` is the mean period over the observing span: equal to
    ``period`` except where the cycle length wanders (LPV), where it is the
    period the observations hold.
    """

    star_id: str
    class_code: str
    subtype: str
    period: float
    period2: float
    amplitude_V: float
    amplitude_I: float
    amplitude2_V: float
    mean_V: float
    mean_I: float
    epoch: float
    member: bool
    blazhko: bool
    blazhko_period: float
    feh_zw: float
    R21: float
    phi31: float
    ra: float
    dec: float
    n_outliers: int = 0
    period_mean: float = np.nan

    def to_dict(self) -> dict[str, Any]:
        return asdict(self)


@dataclass(frozen=True, eq=False)
class SyntheticStar:
    """A star's truth and its noise-free model ``model(time, band) -> mag``."""

    truth: StarTruth
    model: Model


def _sine_series(phase: np.ndarray, amps: np.ndarray, phis: np.ndarray) -> np.ndarray:
    """sum_k A_k sin(2 pi k phase + phi_k), the sine form of JK96."""
    k = np.arange(1, amps.size + 1)
    return np.sin(2.0 * np.pi * np.multiply.outer(phase, k) + phis) @ amps


def _unit_shape(R: np.ndarray, phi_k1: np.ndarray) -> tuple[np.ndarray, np.ndarray, float]:
    """Harmonic amplitudes and phases scaled to unit peak-to-peak, phase 0 at maximum light.

    ``R`` and ``phi_k1`` hold R_k1 and phi_k1 (sine form) for k = 2..n; these
    ratios and phase differences do not change under scaling and time shifts,
    so they are the truth a Fourier fit must recover.
    """
    amps = np.concatenate([[1.0], R])
    k = np.arange(1, amps.size + 1)
    phis = np.concatenate([[0.0], phi_k1])  # phi_k = phi_k1 + k phi_1 with phi_1 = 0
    grid = np.linspace(0.0, 1.0, 2000, endpoint=False)
    curve = _sine_series(grid, amps, phis)
    ptp = curve.max() - curve.min()
    # shift so that maximum light (the smallest magnitude) falls at phase 0
    shift = grid[np.argmin(curve)]
    phis = (phis + 2.0 * np.pi * k * shift) % (2.0 * np.pi)
    return amps / ptp, phis, float(ptp)


def _fourier_mode(period: float, epoch: float, R: np.ndarray, phi_k1: np.ndarray) -> Callable:
    amps, phis, _ = _unit_shape(np.asarray(R, float), np.asarray(phi_k1, float))

    def shape(t: np.ndarray, phase_shift: np.ndarray | float = 0.0) -> np.ndarray:
        # zero-mean unit peak-to-peak shape; maximum light at t = epoch
        return _sine_series((t - epoch) / period + phase_shift, amps, phis)

    return shape


@dataclass(frozen=True)
class _Levels:
    """Mean V, V−I colour and the I/V amplitude ratio of a star."""

    mean_V: float
    v_minus_i: float
    ratio_I: float

    def add(self, base_V: np.ndarray, band: np.ndarray) -> np.ndarray:
        is_i = band == "I"
        scale = np.where(is_i, self.ratio_I, 1.0)
        mean = np.where(is_i, self.mean_V - self.v_minus_i, self.mean_V)
        return mean + scale * base_V


def _rr_harmonics(rng: np.random.Generator, phi31: float, R21: float, n: int) -> tuple:
    """RRab-like harmonics (sine form): phi_k1 ~ (k−1)(phi31/2 + 0.08), R falling fast.

    A sawtooth (fast rise, slow decline) has R_k1 = 1/k and phi_k1 = (k−1) pi
    in the sine form; RRab are softer: phi21 near phi31/2, R31 ~ 0.7 R21 and
    higher orders falling off fast (from memory).  The decay and the phase
    step were tuned so that the rise from minimum to maximum light takes
    ~0.15–0.2 of a cycle without spurious wiggles (rise time typical of RRab,
    from memory).
    """
    k = np.arange(2, n + 1)
    R = R21 * 0.55 ** (k - 2) * rng.uniform(0.9, 1.1, k.size)
    R[0] = R21
    if k.size > 1:
        R[1] = R21 * rng.uniform(0.62, 0.75)
    # below phi31 ~ 4.9 a smaller step keeps the curve free of wiggles
    step = phi31 / 2.0 + 0.08 if phi31 >= 4.9 else 2.53 - 0.77 * (4.9 - phi31)
    phi = (k - 1) * step + rng.normal(0.0, 0.03, k.size)
    if k.size > 1:
        phi[1] = phi31
    return R, phi


def _member_position(rng: np.random.Generator, cluster: Cluster) -> tuple[float, float]:
    # Plummer-like radial profile around the invented centre
    u = rng.random()
    r = cluster.radius_arcmin * 0.4 * np.sqrt(u ** (-2.0 / 3.0) - 1.0)
    r = min(r, 3.0 * cluster.radius_arcmin) / 60.0
    theta = rng.uniform(0.0, 2.0 * np.pi)
    dec = cluster.dec + r * np.sin(theta)
    ra = cluster.ra + r * np.cos(theta) / np.cos(np.radians(cluster.dec))
    return float(ra), float(dec)


def _field_position(rng: np.random.Generator, cluster: Cluster) -> tuple[float, float]:
    half = 2.0 * cluster.radius_arcmin / 60.0
    dec = cluster.dec + rng.uniform(-half, half)
    ra = cluster.ra + rng.uniform(-half, half) / np.cos(np.radians(cluster.dec))
    return float(ra), float(dec)


def _cluster_apparent(cluster: Cluster, m_v: float, vi0: float) -> tuple[float, float]:
    """Apparent V and V−I of a cluster member from M_V and intrinsic (V−I)_0."""
    return m_v + cluster.distance_modulus + cluster.a_v, vi0 + cluster.e_vi


def _field_apparent(rng: np.random.Generator, m_v: float, vi0: float, mu: tuple[float, float]):
    """A field star at a random distance modulus with extinction growing with distance.

    The catalogue keeps field stars between V 11 and 20.3 (saturation and the
    detection limit), so the modulus range is cut to that.
    """
    lo = max(mu[0], 11.5 - m_v)
    hi = max(lo, min(mu[1], 19.3 - m_v))
    mod = rng.uniform(lo, hi)
    # reddening grows with distance (invented)
    ebv = 0.08 + 0.04 * max(mod - 12.0, 0.0) + rng.uniform(0.0, 0.1)
    return m_v + mod + 3.1 * ebv, vi0 + 1.28 * ebv


def _draw_rrab(rng, t0, cluster, option=""):
    # P: 0.47–0.8 d (REFERENCES: RRab typical 0.45–1.0 d); mean ~0.60 d for a
    # cluster between the Oosterhoff groups (mean P 0.55/0.65 d, REFERENCES)
    period = float(np.clip(rng.normal(0.60, 0.07), 0.47, 0.80))
    # Bailey diagram: amplitude falls with period; A_V 0.6–1.2 (from memory)
    amp = float(np.clip(0.95 - 2.8 * (period - 0.58) + rng.normal(0, 0.08), 0.6, 1.2))
    # phi31 (sine) from JK96 at the cluster's [Fe/H], with ~0.1 rad scatter;
    # [Fe/H]_JK from [Fe/H]_ZW by inverting Jurcsik 1995
    feh_jk = (cluster.feh_zw + 0.615) / 0.6988
    phi31 = (feh_jk + 5.038 + 5.394 * period) / 1.345 + rng.normal(0.0, 0.08)
    R21 = float(rng.uniform(0.42, 0.53))  # RRab R21 ~0.4–0.55 (from memory)
    R, phi = _rr_harmonics(rng, phi31, R21, 7)
    # M_V from C99 at the cluster [Fe/H] plus evolution off the ZAHB (~0.1 mag, from memory)
    m_v = 0.23 * (cluster.feh_zw + 1.6) + 0.56 + rng.normal(0.0, 0.06)
    vi0 = float(rng.uniform(0.50, 0.68))  # RRab (V−I)_0 ~0.5–0.7 (from memory)
    ratio = float(rng.uniform(0.58, 0.66))  # A_I/A_V ~0.63 for RR Lyrae (from memory)
    blazhko = rng.random() < 0.35  # Blazhko fraction ~30–50% (from memory)
    if option in ("modulated", "plain"):  # the battery asks for one or the other
        blazhko = option == "modulated"
    pb = float(rng.uniform(20.0, 200.0)) if blazhko else np.nan  # Blazhko periods (from memory)
    am = rng.uniform(0.1, 0.35)  # relative amplitude modulation (from memory)
    pm = rng.uniform(0.01, 0.05)  # phase modulation in cycles (from memory)
    psi = rng.uniform(0, 2 * np.pi)
    epoch = t0 + rng.uniform(0, period)
    shape = _fourier_mode(period, epoch, R, phi)

    def base(t):
        if not blazhko:
            return amp * shape(t)
        arg = 2 * np.pi * (t - epoch) / pb
        return amp * (1.0 + am * np.sin(arg)) * shape(t, pm * np.sin(arg + psi))

    info = {
        "period": period,
        "amplitude_V": amp,
        "ratio_I": ratio,
        "epoch": epoch,
        "blazhko": bool(blazhko),
        "blazhko_period": pb,
        "feh_zw": cluster.feh_zw,
        "R21": R21,
        "phi31": float(phi31 % (2 * np.pi)),
    }
    return base, info, m_v, vi0, True


def _rrc_phi31_cosine(period: float, feh_zw: float) -> float:
    """phi31 (cosine) giving ``feh_zw`` in the M07 RRc relation (larger root)."""
    a = 0.131
    b = 0.982 - 4.198 * period
    c = 52.466 * period**2 - 30.075 * period + 2.424 - feh_zw
    disc = max(b * b - 4 * a * c, 0.0)
    return (-b + np.sqrt(disc)) / (2 * a)


def _draw_rrc(rng, t0, cluster):
    period = float(rng.uniform(0.26, 0.42))  # RRc 0.25–0.42 d (REFERENCES: 0.2–0.45 d)
    amp = float(rng.uniform(0.30, 0.55))  # RRc A_V ~0.3–0.55 (from memory)
    phi31_cos = _rrc_phi31_cosine(period, cluster.feh_zw) + rng.normal(0.0, 0.1)
    phi31 = (phi31_cos - np.pi) % (2 * np.pi)  # to the sine form (REFERENCES)
    R21 = float(
        rng.uniform(0.10, 0.20)
    )  # nearly sinusoidal (Simon & Teays 1982; range from memory)
    R = np.array([R21, rng.uniform(0.04, 0.10), rng.uniform(0.01, 0.05)])
    # phi21 near pi keeps the rise a little faster than the decline (from memory)
    phi = np.array([rng.uniform(2.7, 3.3), phi31, rng.uniform(0, 2 * np.pi)])
    m_v = 0.23 * (cluster.feh_zw + 1.6) + 0.56 + rng.normal(0.0, 0.05)  # C99
    vi0 = float(rng.uniform(0.35, 0.50))  # RRc bluer than RRab (from memory)
    epoch = t0 + rng.uniform(0, period)
    shape = _fourier_mode(period, epoch, R, phi)
    info = {
        "period": period,
        "amplitude_V": amp,
        "ratio_I": float(rng.uniform(0.58, 0.66)),
        "epoch": epoch,
        "feh_zw": cluster.feh_zw,
        "R21": R21,
        "phi31": float(phi31),
    }
    return (lambda t: amp * shape(t)), info, m_v, vi0, True


def _draw_rrd(rng, t0, cluster):
    p0 = float(rng.uniform(0.47, 0.56))  # RRd fundamental periods (from memory)
    p1 = p0 * float(rng.uniform(0.742, 0.748))  # P1/P0 (S16)
    a1 = float(rng.uniform(0.35, 0.5))  # first overtone dominant in most RRd (from memory)
    a0 = float(rng.uniform(0.12, 0.25))
    epoch = t0 + rng.uniform(0, p1)
    over = _fourier_mode(p1, epoch, [0.12, 0.05], [2.6, 5.5])
    fund = _fourier_mode(p0, epoch + rng.uniform(0, p0), [0.35, 0.2], [2.5, 5.0])
    m_v = 0.23 * (cluster.feh_zw + 1.6) + 0.56 + rng.normal(0.0, 0.05)  # C99
    info = {
        "period": p1,
        "period2": p0,
        "amplitude_V": a1,
        "amplitude2_V": a0,
        "ratio_I": float(rng.uniform(0.58, 0.66)),
        "epoch": epoch,
        "feh_zw": cluster.feh_zw,
    }
    return (lambda t: a1 * over(t) + a0 * fund(t)), info, m_v, float(rng.uniform(0.4, 0.55)), True


def _draw_dcep(rng, t0, cluster, subtype):
    if subtype == "F":
        period = float(10 ** rng.uniform(np.log10(3.0), np.log10(30.0)))  # F 3–30 d
        amp = float(rng.uniform(0.5, 1.1))  # from memory
        logp = np.log10(period)
        # a sawtooth-like shape as for RRab (phi31 ~ 5, sine), with the
        # Hertzsprung progression (bump crossing maximum near 10 d; REFERENCES,
        # textbook) shown as a dip of R21 there (depth and width from memory)
        R21 = 0.45 - 0.25 * np.exp(-(((logp - 1.0) / 0.08) ** 2))
        R, phi = _rr_harmonics(rng, float(rng.uniform(4.9, 5.4)), float(R21), 5)
        m_v = -4.05 - 2.43 * (logp - 1.0) + rng.normal(0, 0.1)  # B07 PL
    else:
        period = float(rng.uniform(1.0, 5.0))  # 1O 1–5 d
        amp = float(rng.uniform(0.2, 0.45))  # smaller and more sinusoidal (from memory)
        R21 = float(rng.uniform(0.05, 0.18))
        R = np.array([R21, 0.05])
        phi = np.array([rng.uniform(2.5, 3.5), rng.uniform(4.5, 6.0)])
        # fundamentalised with P1/P0 ~ 0.72 (Alcock et al. 1995) and B07
        m_v = -4.05 - 2.43 * (np.log10(period / 0.72) - 1.0) + rng.normal(0, 0.1)
    epoch = t0 + rng.uniform(0, period)
    shape = _fourier_mode(period, epoch, R, phi)
    vi0 = float(rng.uniform(0.55, 0.95))  # Cepheid (V−I)_0 (from memory)
    info = {
        "period": period,
        "amplitude_V": amp,
        "ratio_I": float(rng.uniform(0.55, 0.65)),  # from memory
        "epoch": epoch,
        "R21": float(R[0]),
        "phi31": float(phi[1] % (2 * np.pi)),
    }
    # young stars: a background disk population, not cluster members
    base = lambda t: amp * shape(t)  # noqa: E731
    return base, info, m_v, vi0, False


def _draw_t2cep(rng, t0, cluster, subtype):
    # subclass period boundaries from MFM09: BL Her < 4 d, W Vir 4–20 d, RV Tau > 20 d
    if subtype == "BLHER":
        period = float(rng.uniform(1.1, 3.8))
        amp = float(rng.uniform(0.5, 0.9))
    elif subtype == "WVIR":
        period = float(rng.uniform(6.0, 18.0))
        amp = float(rng.uniform(0.6, 1.0))
    else:
        period = float(rng.uniform(30.0, 70.0))  # formal period, deep minimum to deep minimum
        amp = float(rng.uniform(0.9, 1.4))
    # M_V ~ -1.64 log P + 0.05 for type II Cepheids (from memory)
    m_v = -1.64 * np.log10(period) + 0.05 + rng.normal(0, 0.1)
    epoch = t0 + rng.uniform(0, period)
    if subtype == "RVTAU":
        # alternating minima: a half-period main wave plus a formal-period term
        main = _fourier_mode(period / 2.0, epoch, [0.15], [2.8])
        alt = rng.uniform(0.2, 0.35)

        def base(t):
            # the sine term makes the minima alternate (deep near phase 0.25),
            # a little cosine makes phase 0 the brighter maximum
            arg = 2 * np.pi * (t - epoch) / period
            return amp * (main(t) + alt * np.sin(arg) - 0.3 * alt * np.cos(arg))
    else:
        shape = _fourier_mode(period, epoch, [0.4, 0.22, 0.1], [2.6, 5.3, 1.7])

        def base(t):
            return amp * shape(t)

    info = {
        "period": period,
        "amplitude_V": amp,
        "ratio_I": float(rng.uniform(0.55, 0.65)),
        "epoch": epoch,
    }
    return base, info, m_v, float(rng.uniform(0.5, 0.9)), True


def _draw_acep(rng, t0, cluster, subtype):
    period = float(rng.uniform(0.6, 1.6))  # anomalous Cepheids 0.5–2 d (from memory)
    amp = float(rng.uniform(0.7, 1.0))
    m_v = -2.5 * np.log10(period) - 0.4 + rng.normal(0, 0.1)  # ~1–2 mag above the HB (from memory)
    epoch = t0 + rng.uniform(0, period)
    R, phi = _rr_harmonics(rng, 5.2, 0.45, 6)
    shape = _fourier_mode(period, epoch, R, phi)
    info = {
        "period": period,
        "amplitude_V": amp,
        "ratio_I": 0.62,
        "epoch": epoch,
        "R21": 0.45,
        "phi31": float(phi[1] % (2 * np.pi)),
    }
    return (lambda t: amp * shape(t)), info, m_v, float(rng.uniform(0.4, 0.6)), True


def _draw_dsct(rng, t0, cluster, subtype, option=""):
    if subtype == "HADS":
        period = float(rng.uniform(0.05, 0.16))  # P24: 0.02–0.25 d
        amp = float(rng.uniform(0.32, 0.7))  # HADS above 0.3 mag (P24)
        R = [0.3, 0.12]
        phi = [2.8, 5.6]
        second = rng.uniform(0.773, 0.78)  # 1O/F ratio ~0.775 (from memory)
        a2 = amp * rng.uniform(0.1, 0.3)
    else:
        period = float(rng.uniform(0.035, 0.09))  # SX Phe short periods (from memory)
        amp = float(rng.uniform(0.02, 0.15))  # small amplitude (P24; range from memory)
        R = [0.1]
        phi = [3.0]
        second = rng.uniform(0.76, 0.8) if rng.random() < 0.3 else 0.0
        if option == "multi":  # a second radial mode forced (the battery's multi-mode stars)
            second = second or rng.uniform(0.76, 0.8)
        a2 = amp * rng.uniform(0.2, 0.5)
    epoch = t0 + rng.uniform(0, period)
    shape = _fourier_mode(period, epoch, R, phi)
    p2 = period * second if second else np.nan
    phase2 = rng.uniform(0, 1)

    def base(t):
        m = amp * shape(t)
        if second:
            m = m + a2 * 0.5 * np.sin(2 * np.pi * ((t - epoch) / p2 + phase2))
        return m

    m_v = -2.89 * np.log10(period) - 1.31 + rng.normal(0, 0.1)  # McN11 (memory)
    info = {
        "period": period,
        "period2": p2,
        "amplitude_V": amp,
        "amplitude2_V": a2 if second else np.nan,
        "ratio_I": float(rng.uniform(0.55, 0.65)),
        "epoch": epoch,
    }
    return base, info, m_v, float(rng.uniform(0.15, 0.35)), True


def _eclipse_flux(phase, depth1, depth2, width, ellipsoidal, reflection, phase2=0.5):
    """Out-of-eclipse flux 1 with Gaussian dips at phase 0 and ``phase2``."""
    d1 = (phase + 0.5) % 1.0 - 0.5
    d2 = (phase - phase2 + 0.5) % 1.0 - 0.5
    flux = (
        1.0 - depth1 * np.exp(-0.5 * (d1 / width) ** 2) - depth2 * np.exp(-0.5 * (d2 / width) ** 2)
    )
    # ellipsoidal: faintest at conjunctions (phases 0 and 0.5), brightest at quadrature
    flux -= ellipsoidal * 0.5 * (1 + np.cos(4 * np.pi * phase))
    # reflection: the companion's lit face is seen near phase 0.5
    flux -= reflection * 0.5 * (1 + np.cos(2 * np.pi * phase))
    return flux


def _draw_eclipsing(rng, t0, cluster, code):
    # Gaussian dips in flux; widths and depths per type (from memory)
    if code == "EW":
        period = float(rng.uniform(0.25, 0.6))  # EW 0.25–0.6 d (from memory)
        depth1 = float(rng.uniform(0.15, 0.5))
        depth2 = depth1 * float(rng.uniform(0.88, 1.0))  # nearly equal minima
        width, ell, refl, phase2 = rng.uniform(0.10, 0.14), depth1 * 0.3, 0.0, 0.5
    elif code == "EB":
        period = float(rng.uniform(0.5, 2.0))
        depth1 = float(rng.uniform(0.15, 0.5))
        depth2 = depth1 * float(rng.uniform(0.25, 0.6))
        width, ell, refl, phase2 = rng.uniform(0.05, 0.08), rng.uniform(0.05, 0.12), 0.02, 0.5
    else:
        period = float(10 ** rng.uniform(np.log10(0.8), np.log10(12.0)))
        depth1 = float(rng.uniform(0.2, 0.65))
        depth2 = depth1 * float(rng.uniform(0.0, 0.6))
        width, ell, refl = rng.uniform(0.01, 0.03), 0.0, 0.0
        # some detached systems are eccentric: secondary eclipse off phase 0.5
        phase2 = 0.5 if rng.random() < 0.7 else float(rng.uniform(0.40, 0.60))
    ratio_i = float(rng.uniform(0.85, 1.0))
    epoch = t0 + rng.uniform(0, period)

    def base(t, ri=1.0):
        phase = ((t - epoch) / period) % 1.0
        flux = _eclipse_flux(phase, depth1 * ri, depth2 * ri, width, ell * ri, refl * ri, phase2)
        return -2.5 * np.log10(flux)

    grid = np.linspace(0.0, 1.0, 4001)

    def ptp(ri):
        mag = -2.5 * np.log10(
            _eclipse_flux(grid, depth1 * ri, depth2 * ri, width, ell * ri, refl * ri, phase2)
        )
        return float(mag.max() - mag.min())

    member = rng.random() < 0.3  # most binaries are field stars (invented share)
    m_v = float(rng.uniform(2.0, 5.0))
    info = {
        "period": period,
        "amplitude_V": ptp(1.0),
        "amplitude_I": ptp(ratio_i),
        "ratio_I": ratio_i,
        "epoch": epoch,
        "band_model": base,
    }
    return base, info, m_v, float(rng.uniform(0.45, 1.0)), member


def _draw_lpv(rng, t0, cluster, subtype, span):
    if subtype == "MIRA":
        period = float(rng.uniform(150.0, 400.0))  # Mira 150–400 d (from memory)
        amp = float(rng.uniform(2.5, 5.0))  # V amplitude above 2.5 mag (from memory)
        ratio = float(rng.uniform(0.4, 0.5))
        m_v, vi0 = float(rng.uniform(-1.0, 0.5)), float(rng.uniform(2.5, 4.0))
    else:
        period = float(rng.uniform(40.0, 140.0))  # semi-regular 30–150 d (from memory)
        amp = float(rng.uniform(0.3, 1.0))
        ratio = float(rng.uniform(0.5, 0.6))
        m_v, vi0 = float(rng.uniform(-2.0, -0.8)), float(rng.uniform(1.6, 2.6))
    epoch = t0 + rng.uniform(0, period)
    # cycle-to-cycle changes: the phase and amplitude wander on a coarse grid
    knots = np.arange(t0 - period, t0 + span + 2 * period, period)
    wander = 0.02 if subtype == "MIRA" else 0.15
    phase_knots = np.cumsum(rng.normal(0.0, wander, knots.size))
    amp_knots = 1.0 + rng.normal(0.0, 0.08 if subtype == "MIRA" else 0.25, knots.size)
    shape = _fourier_mode(period, epoch, [0.12], [2.9])
    p2 = period * float(rng.uniform(1.8, 2.2)) if subtype == "SR" else np.nan
    ph2 = rng.uniform(0, 1)
    # The wander is a random walk, so over a few cycles the star keeps a mean
    # period of its own, ~1% off the nominal one at 3-7 cycles: the period the
    # observations hold (and a recovery is judged against) is the nominal
    # frequency plus the mean rate of the phase wander over the span.
    span_grid = np.linspace(t0, t0 + span, 2001)
    drift = np.polyfit(span_grid - t0, np.interp(span_grid, knots, phase_knots), 1)[0]
    period_mean = 1.0 / (1.0 / period + drift)

    def base(t):
        dphase = np.interp(t, knots, phase_knots)
        scale = np.clip(np.interp(t, knots, amp_knots), 0.3, None)
        m = amp * scale * shape(t, dphase)
        if subtype == "SR":
            m = m + 0.3 * amp * np.sin(2 * np.pi * ((t - epoch) / p2 + ph2))
        return m

    info = {
        "period": period,
        "period_mean": float(period_mean),
        "period2": p2,
        "amplitude_V": amp,
        "ratio_I": ratio,
        "epoch": epoch,
    }
    return base, info, m_v, vi0, bool(rng.random() < 0.5)


def _draw_nonvar(rng, t0, cluster):
    # a cluster colour–magnitude sequence from the turn-off up the giant branch,
    # plus field dwarfs; luminosity function rising to faint stars (invented)
    m_v = float(4.8 - rng.exponential(1.3))
    vi0 = float(np.clip(0.55 + 0.12 * (4.0 - m_v) / 2.0 + rng.normal(0, 0.05), 0.45, 1.5))
    member = rng.random() < 0.7
    if not member:
        m_v = float(rng.uniform(3.0, 6.5))
    return (lambda t: np.zeros_like(t)), {"period": np.nan, "ratio_I": 1.0}, m_v, vi0, member


_DRAWERS = {
    "RRab": lambda rng, t0, cl, sub, span, opt="": _draw_rrab(rng, t0, cl, opt),
    "RRc": lambda rng, t0, cl, sub, span: _draw_rrc(rng, t0, cl),
    "RRd": lambda rng, t0, cl, sub, span: _draw_rrd(rng, t0, cl),
    "DCEP": lambda rng, t0, cl, sub, span: _draw_dcep(rng, t0, cl, sub),
    "T2CEP": lambda rng, t0, cl, sub, span: _draw_t2cep(rng, t0, cl, sub),
    "ACEP": lambda rng, t0, cl, sub, span: _draw_acep(rng, t0, cl, sub),
    "DSCT": lambda rng, t0, cl, sub, span, opt="": _draw_dsct(rng, t0, cl, sub, opt),
    "EW": lambda rng, t0, cl, sub, span: _draw_eclipsing(rng, t0, cl, "EW"),
    "EB": lambda rng, t0, cl, sub, span: _draw_eclipsing(rng, t0, cl, "EB"),
    "EA": lambda rng, t0, cl, sub, span: _draw_eclipsing(rng, t0, cl, "EA"),
    "LPV": lambda rng, t0, cl, sub, span: _draw_lpv(rng, t0, cl, sub, span),
    "NONVAR": lambda rng, t0, cl, sub, span: _draw_nonvar(rng, t0, cl),
}


def draw_star(
    rng: np.random.Generator,
    star_id: str,
    class_code: str,
    subtype: str = "",
    t0: float = CadenceSettings().start_hjd,
    span: float = 1100.0,
    cluster: Cluster = CLUSTER,
    option: str = "",
) -> SyntheticStar:
    """Draw one star of a class: its truth and its noise-free model.

    Parameters
    ----------
    rng : numpy Generator
    star_id, class_code, subtype : str
        ``class_code`` is one of the keys of the class table (RRab, RRc, RRd,
        DCEP, T2CEP, ACEP, DSCT, EW, EB, EA, LPV, NONVAR).
    t0, span : float
        Start and length (days) of the observations; epochs fall near ``t0``.
    option : str
        ``"modulated"`` / ``"plain"`` force an RRab's modulation, ``"multi"``
        a delta Scuti's second mode; other classes ignore it.
    """
    if class_code not in _DRAWERS:
        raise SettingsError(
            f"unknown class {class_code!r}; expected one of {', '.join(_DRAWERS)}",
            field="class_code",
        )
    drawer = _DRAWERS[class_code]
    if option and class_code in ("RRab", "DSCT"):
        base, info, m_v, vi0, member = drawer(rng, t0, cluster, subtype, span, option)
    else:
        base, info, m_v, vi0, member = drawer(rng, t0, cluster, subtype, span)
    if member:
        mean_v, vi = _cluster_apparent(cluster, m_v, vi0)
        ra, dec = _member_position(rng, cluster)
    else:
        # classical Cepheids sit far behind the cluster (invented), others nearer
        mu = (16.5, 18.0) if class_code == "DCEP" else (10.0, 15.5)
        mean_v, vi = _field_apparent(rng, m_v, vi0, mu)
        ra, dec = _field_position(rng, cluster)
    levels = _Levels(float(mean_v), float(vi), float(info["ratio_I"]))
    band_model = info.pop("band_model", None)

    if band_model is not None:
        # eclipses: depths in I follow the flux ratio rather than a magnitude scaling
        def model(t, band):
            t = np.asarray(t, float)
            band = np.broadcast_to(np.asarray(band, dtype=object), t.shape)
            is_i = band == "I"
            mag = np.where(is_i, band_model(t, levels.ratio_I), band_model(t, 1.0))
            return np.where(is_i, levels.mean_V - levels.v_minus_i, levels.mean_V) + mag
    else:

        def model(t, band):
            t = np.asarray(t, float)
            band = np.broadcast_to(np.asarray(band, dtype=object), t.shape)
            return levels.add(base(t), band)

    # mean magnitudes of the noise-free model, averaged over the observing span
    grid = t0 + np.linspace(0.0, span, 6007)
    mean_V = float(np.mean(model(grid, "V")))
    mean_I = float(np.mean(model(grid, "I")))
    amp_v = float(info.get("amplitude_V", 0.0))
    amp_i = float(info.get("amplitude_I", amp_v * info["ratio_I"]))
    if class_code == "NONVAR":
        amp_v = amp_i = 0.0
    fourier = {"R21": info.get("R21", np.nan), "phi31": info.get("phi31", np.nan)}
    truth = StarTruth(
        star_id=star_id,
        class_code=class_code,
        subtype=subtype,
        period=float(info.get("period", np.nan)),
        period2=float(info.get("period2", np.nan)),
        amplitude_V=amp_v,
        amplitude_I=amp_i,
        amplitude2_V=float(info.get("amplitude2_V", np.nan)),
        mean_V=mean_V,
        mean_I=mean_I,
        epoch=float(info.get("epoch", np.nan)),
        member=bool(member),
        blazhko=bool(info.get("blazhko", False)),
        blazhko_period=float(info.get("blazhko_period", np.nan)),
        feh_zw=float(info.get("feh_zw", np.nan)),
        R21=float(fourier["R21"]),
        phi31=float(fourier["phi31"]),
        ra=ra,
        dec=dec,
        period_mean=float(info.get("period_mean", info.get("period", np.nan))),
    )
    return SyntheticStar(truth=truth, model=model)


# ------------------------------------------------------------ front ends
def _observe(
    rng: np.random.Generator,
    star: SyntheticStar,
    time: np.ndarray,
    band: np.ndarray,
    noise: NoiseModel,
    outlier_rate: float,
) -> tuple[np.ndarray, np.ndarray, int]:
    """Noisy magnitudes and reported errors at the given epochs, with a few outliers."""
    true_mag = star.model(time, band)
    sigma = noise_sigma(true_mag, band, noise)
    mag = true_mag + rng.normal(0.0, 1.0, time.size) * sigma
    reported = sigma * np.clip(
        1.0 + noise.error_jitter * rng.normal(0.0, 1.0, time.size), 0.5, None
    )
    n_out = min(int(rng.poisson(outlier_rate)), time.size)
    if n_out:
        idx = rng.choice(time.size, n_out, replace=False)
        # cosmic rays and bad columns: single points off by 0.3–1.5 mag either way
        mag[idx] += rng.choice([-1.0, 1.0], n_out) * rng.uniform(0.3, 1.5, n_out)
    return mag, reported, n_out


def _star_list(n_stars: int, rng: np.random.Generator) -> list[tuple[str, str]]:
    counts = class_counts(n_stars)
    labels = [key for key, c in counts.items() for _ in range(c)]
    order = rng.permutation(len(labels))  # ids do not reveal the class
    return [labels[i] for i in order]


@dataclass(frozen=True, eq=False)
class SyntheticSurvey:
    """The output of :func:`make_survey`."""

    lightcurves: tuple[LightCurve, ...]
    stars: tuple[SyntheticStar, ...]
    cluster: Cluster
    site: Site
    seed: int

    @property
    def truth(self) -> tuple[StarTruth, ...]:
        return tuple(s.truth for s in self.stars)

    def truth_table(self):
        """The injected truth as an astropy Table (one row per star)."""
        return truth_table(self.truth)


def truth_table(truth: tuple[StarTruth, ...] | list[StarTruth]):
    """An astropy Table of :class:`StarTruth` rows, with units and descriptions."""
    from astropy.table import Table

    rows = [t.to_dict() for t in truth]
    names = list(StarTruth.__dataclass_fields__)
    table = Table(rows=[[r[n] for n in names] for r in rows], names=names)
    units = {
        "period": "d",
        "period2": "d",
        "epoch": "d",
        "blazhko_period": "d",
        "ra": "deg",
        "dec": "deg",
    }
    for name in ("amplitude_V", "amplitude_I", "amplitude2_V", "mean_V", "mean_I"):
        units[name] = "mag"
    for name, unit in units.items():
        table[name].unit = unit
    table["epoch"].description = "HJD of maximum light (pulsators) or primary minimum (eclipsing)"
    table["phi31"].description = "phi31 of the V template, sine form, radians"
    return table


def make_survey(
    n_stars: int = 300,
    seed: int = 20260,
    cadence: CadenceSettings = CadenceSettings(),
    noise: NoiseModel = NoiseModel(),
    cluster: Cluster = CLUSTER,
    site: Site = SITE,
    outlier_rate: float = 1.0,
    missing: tuple[float, float] = (0.0, 0.08),
) -> SyntheticSurvey:
    """A multi-band survey of one cluster field from one site.

    All stars share the field's epochs (one camera); each star loses a share
    of them drawn from ``missing`` (off the chip, saturated, blended).

    Parameters
    ----------
    n_stars : int
    seed : int
        Same seed, same survey.
    outlier_rate : float
        Mean number of single-point outliers per star (Poisson).

    Returns
    -------
    SyntheticSurvey
        ``lightcurves`` (HJD, bands V and I) and ``stars`` with their truth.
    """
    root = np.random.SeedSequence(seed)
    cadence_seed, list_seed, star_seed = root.spawn(3)
    time, band = make_cadence(np.random.default_rng(cadence_seed), cadence, site, cluster.ra)
    labels = _star_list(n_stars, np.random.default_rng(list_seed))
    span = float(time[-1] - time[0]) + 1.0
    curves, stars = [], []
    width = max(3, len(str(n_stars)))
    for k, ((code, sub), ss) in enumerate(zip(labels, star_seed.spawn(n_stars), strict=True)):
        rng = np.random.default_rng(ss)
        star_id = f"{cluster.id_prefix}{k + 1:0{width}d}"
        star = draw_star(rng, star_id, code, sub, t0=float(time[0]), span=span, cluster=cluster)
        keep = rng.random(time.size) >= rng.uniform(*missing)
        mag, err, n_out = _observe(rng, star, time[keep], band[keep], noise, outlier_rate)
        truth = StarTruth(**{**star.truth.to_dict(), "n_outliers": n_out})
        stars.append(SyntheticStar(truth=truth, model=star.model))
        meta = StarMeta(ra=truth.ra, dec=truth.dec, notes=("synthetic",))
        curves.append(
            LightCurve(star_id, time[keep], mag, err, band[keep], time_scale="HJD", meta=meta)
        )
    return SyntheticSurvey(tuple(curves), tuple(stars), cluster, site, seed)


@dataclass(frozen=True, eq=False)
class SyntheticField:
    """Many stars of one field in one band, as arrays (for batched work).

    ``time`` is (n_epochs,) when the stars share their epochs, else
    (n_stars, n_epochs).  ``mag`` and ``mag_err`` are (n_stars, n_epochs)
    with NaN where a star has no point.
    """

    star_ids: tuple[str, ...]
    time: np.ndarray
    mag: np.ndarray
    mag_err: np.ndarray
    truth: tuple[StarTruth, ...]
    band: str = "V"

    @property
    def shared_epochs(self) -> bool:
        return self.time.ndim == 1

    def star_time(self, index: int) -> np.ndarray:
        return self.time if self.shared_epochs else self.time[index]

    def lightcurves(self) -> list[LightCurve]:
        """One LightCurve per star with its missing points left out."""
        out = []
        for k, star_id in enumerate(self.star_ids):
            ok = np.isfinite(self.mag[k])
            t = self.star_time(k)[ok]
            meta = StarMeta(ra=self.truth[k].ra, dec=self.truth[k].dec, notes=("synthetic",))
            out.append(
                LightCurve(
                    star_id, t, self.mag[k][ok], self.mag_err[k][ok], self.band, "HJD", meta=meta
                )
            )
        return out


def synthetic_field(
    n_stars: int,
    n_epochs: int = 700,
    seed: int = 7,
    shared_epochs: bool = True,
    missing: tuple[float, float] = (0.0, 0.1),
    noise: NoiseModel = NoiseModel(),
    cluster: Cluster = CLUSTER,
) -> SyntheticField:
    """Many stars observed at the same epochs in V (one field, one camera).

    The epochs follow the same kind of cadence as :func:`make_survey`, made
    denser (more runs, more visits per night) and cut to exactly
    ``n_epochs``.  Each star loses a share of points drawn from ``missing``
    (they are NaN).  With ``shared_epochs=False`` each star gets its own
    cadence.
    """
    if n_epochs < 10:
        raise SettingsError(f"n_epochs must be at least 10, got {n_epochs}", field="n_epochs")
    root = np.random.SeedSequence(seed)
    cadence_seed, list_seed, star_seed = root.spawn(3)
    dense = CadenceSettings(
        runs_per_season=10, run_nights=(4, 10), v_per_night=1.0 + n_epochs / 100.0, i_per_night=0.0
    )

    def epochs(rng):
        t, b = make_cadence(rng, dense, SITE, cluster.ra)
        t = t[b == "V"]
        while t.size < n_epochs:  # rare for sensible n_epochs: add another three seasons
            t2, b2 = make_cadence(rng, dense, SITE, cluster.ra)
            t = np.sort(np.concatenate([t, t2[b2 == "V"] + 3 * 365.25]))
        return np.sort(rng.choice(t, n_epochs, replace=False))

    crng = np.random.default_rng(cadence_seed)
    common = epochs(crng) if shared_epochs else None
    labels = _star_list(n_stars, np.random.default_rng(list_seed))
    mags = np.empty((n_stars, n_epochs))
    errs = np.empty((n_stars, n_epochs))
    times = np.empty((n_stars, n_epochs)) if not shared_epochs else None
    truths, ids = [], []
    width = max(3, len(str(n_stars)))
    for k, ((code, sub), ss) in enumerate(zip(labels, star_seed.spawn(n_stars), strict=True)):
        rng = np.random.default_rng(ss)
        t = common if shared_epochs else epochs(rng)
        star_id = f"{cluster.id_prefix}{k + 1:0{width}d}"
        star = draw_star(
            rng, star_id, code, sub, t0=float(t[0]), span=float(t[-1] - t[0]) + 1.0, cluster=cluster
        )
        mag, err, n_out = _observe(rng, star, t, np.full(t.size, "V", dtype=object), noise, 1.0)
        lost = rng.random(n_epochs) < rng.uniform(*missing)
        mag[lost] = np.nan
        err[lost] = np.nan
        mags[k], errs[k] = mag, err
        if times is not None:
            times[k] = t
        truths.append(StarTruth(**{**star.truth.to_dict(), "n_outliers": n_out}))
        ids.append(star_id)
    return SyntheticField(tuple(ids), common if shared_epochs else times, mags, errs, tuple(truths))


# ------------------------------------------------------- cadence battery
#: Survey cadences of the benchmark battery (:func:`battery_star`).
BATTERY_CADENCES = ("sparse", "nightly", "two_band", "space")

#: (class, subtype, option) of the battery; the option forces modulation of
#: an RRab ("modulated"/"plain") or a second mode of a delta Scuti ("multi").
BATTERY_CLASSES: tuple[tuple[str, str, str], ...] = (
    ("RRab", "", "plain"),
    ("RRab", "", "modulated"),
    ("RRc", "", ""),
    ("RRd", "", ""),
    ("DCEP", "F", ""),
    ("DSCT", "SXPHE", "multi"),
    ("EW", "", ""),
    ("EA", "", ""),
    ("LPV", "MIRA", ""),
    ("NONVAR", "", ""),
)

#: Camera of the space-like cadence: a small telescope above the air, so
#: brighter zero points and no sky glow from the atmosphere (invented).
SPACE_NOISE = NoiseModel(
    zero_point={"V": 30.4, "I": 29.8}, sky_electrons={"V": 300.0, "I": 650.0}, floor=0.0015
)


def _observable_nights(rng: np.random.Generator, n_seasons: int, season_days: float):
    """Night numbers (days from the start) inside ``n_seasons`` seasons a year apart."""
    starts = 365.25 * np.arange(n_seasons) + rng.uniform(0.0, 20.0, n_seasons)
    nights = [s + np.arange(int(season_days)) for s in starts]
    return np.floor(np.concatenate(nights))


def battery_cadence(kind: str, rng: np.random.Generator) -> tuple[np.ndarray, np.ndarray]:
    """Epochs (days from an arbitrary start, sorted) and band of each, for one cadence.

    * ``sparse``: an all-sky survey, 60–90 visits over three seasons of
      ~240 nights, one band (V); a third of the visits has a second one some
      20–60 minutes later (a survey's paired exposures).
    * ``nightly``: one site, two seasons of ~150 nights, weather losing ~30%,
      1–3 points a night spread over the hours around midnight (V).
    * ``two_band``: ~400 I epochs over three seasons (about one a clear
      night) and ~50 V epochs on a random subset of those nights.
    * ``space``: one point every 30 minutes for 27 days in one band (I),
      with one gap of ~1 day in the middle (data downlink).

    Ground-based times of night fall within ±0.2 d of local midnight, which
    drifts through the season as the field's transit does (~4 min a night).
    """
    if kind not in BATTERY_CADENCES:
        raise SettingsError(
            f"unknown cadence {kind!r}; expected one of {', '.join(BATTERY_CADENCES)}",
            field="cadence",
        )
    if kind == "space":
        step = 30.0 / 1440.0
        t = np.arange(0.0, 27.0, step)
        gap0 = rng.uniform(12.5, 14.0)
        t = t[(t < gap0) | (t > gap0 + rng.uniform(0.8, 1.2))]
        return t, np.full(t.size, "I", dtype=object)

    def night_time(nights: np.ndarray, n: int | np.ndarray) -> np.ndarray:
        # the field transits ~4 minutes earlier each night: over a season the
        # usable hours slide across the night
        centre = 0.5 - ((nights % 365.25) * (4.0 / 1440.0)) % 0.3 + 0.15
        return nights + centre + rng.uniform(-0.2, 0.2, np.size(nights))

    if kind == "sparse":
        nights = _observable_nights(rng, 3, 240)
        n = int(rng.integers(60, 91))
        pick = np.sort(rng.choice(nights, n, replace=False))
        t = night_time(pick, n)
        pairs = rng.random(n) < 0.33
        t = np.concatenate([t, t[pairs] + rng.uniform(20.0, 60.0, pairs.sum()) / 1440.0])
        t = np.sort(t)[: max(60, min(90, t.size))]
        return t, np.full(t.size, "V", dtype=object)
    if kind == "nightly":
        nights = _observable_nights(rng, 2, 150)
        nights = nights[rng.random(nights.size) > 0.3]
        per = rng.integers(1, 4, nights.size)
        rep = np.repeat(nights, per)
        t = np.sort(night_time(rep, rep.size))
        return t, np.full(t.size, "V", dtype=object)
    nights = _observable_nights(rng, 3, 200)
    nights = nights[rng.random(nights.size) > 0.3]
    i_nights = np.sort(rng.choice(nights, min(nights.size, int(rng.integers(380, 421))), False))
    t_i = night_time(i_nights, i_nights.size)
    with_v = np.sort(rng.choice(t_i.size, int(rng.integers(45, 56)), replace=False))
    t_v = t_i[with_v] + 5.0 / 1440.0  # V right after I on some nights
    t = np.concatenate([t_i, t_v])
    band = np.array(["I"] * t_i.size + ["V"] * t_v.size, dtype=object)
    order = np.argsort(t, kind="stable")
    return t[order], band[order]


def _systematics(rng: np.random.Generator, kind: str, time: np.ndarray) -> np.ndarray:
    """Instrumental magnitude offsets: nightly zero points, drifts, ramps.

    Ground: each night's zero point is off by N(0, 4–8 mmag); each season
    drifts linearly by up to ±0.015 mag end to end (flat-field ageing,
    invented).  Space: a slow drift of up to ±0.01 mag over the run and a
    scattered-light ramp of 5–20 mmag decaying over 0.3–1 d after the start
    and after the gap (invented, typical in kind).
    """
    offset = np.zeros(time.size)
    if kind == "space":
        offset += rng.uniform(-0.01, 0.01) * (time - time.mean()) / np.ptp(time)
        starts = np.concatenate([[time[0]], time[1:][np.diff(time) > 0.2]])
        for start in starts:
            after = time >= start
            scale = rng.uniform(0.3, 1.0)
            offset[after] += rng.uniform(0.005, 0.02) * np.exp(-(time[after] - start) / scale)
        return offset
    night = np.floor(time)
    nights, index = np.unique(night, return_inverse=True)
    offset += rng.normal(0.0, rng.uniform(0.004, 0.008), nights.size)[index]
    season = np.floor(time / 365.25)
    for s in np.unique(season):
        sel = season == s
        span = np.ptp(time[sel]) or 1.0
        offset[sel] += rng.uniform(-0.015, 0.015) * ((time[sel] - time[sel].min()) / span - 0.5)
    return offset


def battery_star(
    kind: str,
    class_code: str,
    subtype: str = "",
    option: str = "",
    seed: int = 0,
    star_id: str | None = None,
    outlier_fraction: float = 0.01,
) -> tuple[LightCurve, StarTruth]:
    """One star of the cadence battery: its light curve and its truth.

    See :func:`battery_star_with_model`, which also returns the noise-free
    magnitudes.
    """
    lc, truth, _ = battery_star_with_model(
        kind, class_code, subtype, option, seed, star_id, outlier_fraction
    )
    return lc, truth


def battery_star_with_model(
    kind: str,
    class_code: str,
    subtype: str = "",
    option: str = "",
    seed: int = 0,
    star_id: str | None = None,
    outlier_fraction: float = 0.01,
) -> tuple[LightCurve, StarTruth, np.ndarray]:
    """One star of the cadence battery: its light curve, its truth and its noise-free magnitudes.

    The star is drawn from the class templates of :func:`draw_star` (same
    sources); ``option`` forces an RRab's modulation (``"modulated"`` or
    ``"plain"``) or a delta Scuti's second mode (``"multi"``).  The light
    curve carries noise that grows with magnitude (:func:`noise_sigma`; the
    space camera is :data:`SPACE_NOISE`), the systematics of the cadence
    (nightly zero points and seasonal drifts, or ramps after gaps), and
    single-point outliers on ``outlier_fraction`` of the points (at least
    one), off by 0.3–1.5 mag either way.  The same arguments give the same
    star.
    """
    key = _class_key(f"{class_code}{subtype}{option}")
    ss = np.random.SeedSequence([seed, BATTERY_CADENCES.index(kind), key])
    cad_rng, star_rng, noise_rng = (np.random.default_rng(s) for s in ss.spawn(3))
    time, band = battery_cadence(kind, cad_rng)
    time = time + 2461000.5  # an invented start on the HJD axis
    span = float(np.ptp(time)) + 1.0
    star_id = star_id or f"BAT-{kind}-{class_code}{subtype}{option}-{seed}"
    star = draw_star(
        star_rng, star_id, class_code, subtype, t0=float(time[0]), span=span, option=option
    )
    noise = SPACE_NOISE if kind == "space" else NoiseModel()
    true_mag = star.model(time, band)
    sigma = noise_sigma(true_mag, band, noise)
    mag = true_mag + noise_rng.normal(0.0, 1.0, time.size) * sigma
    mag += _systematics(noise_rng, kind, time - time[0])
    err = sigma * np.clip(
        1.0 + noise.error_jitter * noise_rng.normal(0.0, 1.0, time.size), 0.5, None
    )
    n_out = max(1, int(round(outlier_fraction * time.size))) if outlier_fraction > 0 else 0
    if n_out:
        idx = noise_rng.choice(time.size, n_out, replace=False)
        mag[idx] += noise_rng.choice([-1.0, 1.0], n_out) * noise_rng.uniform(0.3, 1.5, n_out)
    truth = StarTruth(**{**star.truth.to_dict(), "n_outliers": n_out})
    meta = StarMeta(ra=truth.ra, dec=truth.dec, notes=("synthetic", f"cadence {kind}"))
    lc = LightCurve(star_id, time, mag, err, band, time_scale="HJD", meta=meta)
    return lc, truth, true_mag


def _class_key(class_code: str) -> int:
    return sum(ord(c) * 31**k for k, c in enumerate(class_code)) % 2**31


#: Detection floor of :func:`period_determinable`: half the peak-to-peak
#: amplitude times sqrt(N/2) over the median error (our choice: a clear
#: detection of a sinusoid with that amplitude).
DETECTION_SNR = 8.0

#: Fewest distinct eclipses an eclipsing binary's points must sample for its
#: period to count as determinable (our choice, as an observer would judge
#: it): the times of two eclipses fix the period only up to the whole number
#: of cycles between them; a third leaves every period whose fold lines up
#: three times, of which a search over the 1e4-1e5 independent trial
#: periods of a survey finds several that the out-of-eclipse points do not
#: rule out; a fourth leaves about one.
MIN_ECLIPSES_SAMPLED = 4

#: A point samples an eclipse when the noise-free model there lies this many
#: of the point's errors below the out-of-eclipse light (our choice: a dip a
#: single point shows clearly).
ECLIPSE_POINT_SIGMA = 3.0

ECLIPSING_CLASSES = ("EA", "EB", "EW")


def eclipses_sampled(lc: LightCurve, truth: StarTruth, true_mag: np.ndarray) -> int:
    """Distinct eclipses (cycle and minimum) with a point in them, band with most points.

    A point is in an eclipse when the noise-free magnitude ``true_mag`` there
    lies :data:`ECLIPSE_POINT_SIGMA` of its error below the brightest
    noise-free magnitude of the band (the out-of-eclipse light); each such
    point belongs to the eclipse of its cycle nearest in phase, primary
    (phase 0) or other (any other phase, e.g. the secondary).
    """
    sel = lc.good & (lc.band_mask(lc.bands[0]))
    t, model = lc.time[sel], np.asarray(true_mag, float)[sel]
    err = np.asarray(lc.mag_err, float)[sel] if lc.has_errors else np.full(t.size, np.nan)
    inside = model - model.min() >= ECLIPSE_POINT_SIGMA * err
    cycles = (t[inside] - truth.epoch) / truth.period
    nearest = np.round(cycles)
    primary = np.abs(cycles - nearest) < 0.1
    # a secondary's cycle is counted from the primary before it
    labels = np.where(primary, 2 * nearest, 2 * np.floor(cycles) + 1)
    return int(np.unique(labels).size)


def period_determinable(
    lc: LightCurve, truth: StarTruth, true_mag: np.ndarray | None = None
) -> tuple[bool, str]:
    """Whether the data can determine the injected period, with the reason.

    The rule (ours, stated for the benchmark and the tests): a period can be
    determined when (1) the baseline holds at least two cycles, (2) the
    period is at least twice the typical sampling step of
    :func:`sampling_step`, (3) the signal is clear:
    (A/2) sqrt(N/2) / median error >= :data:`DETECTION_SNR`, A the
    peak-to-peak amplitude in the band with most points, and (4) for an
    eclipsing binary, given its noise-free magnitudes ``true_mag``, its
    points sample at least :data:`MIN_ECLIPSES_SAMPLED` distinct eclipses
    (:func:`eclipses_sampled`): the amplitude of a binary says little when
    its eclipses are narrow and few points fall in them.
    """
    period = truth.period
    if not np.isfinite(period):
        return False, "no period"
    t, _, e = lc.arrays(lc.bands[0])
    if lc.baseline < 2.0 * period:
        return False, f"fewer than 2 cycles in {lc.baseline:.3g} d"
    step, _ = sampling_step(lc.time)
    if period < 2.0 * step:
        return False, f"period below twice the sampling step {step:.3g} d"
    amp = truth.amplitude_I if lc.bands[0] == "I" else truth.amplitude_V
    snr = 0.5 * amp * np.sqrt(t.size / 2.0) / float(np.median(e))
    if snr < DETECTION_SNR:
        return False, f"signal S/N {snr:.3g} below {DETECTION_SNR:g}"
    if true_mag is not None and truth.class_code in ECLIPSING_CLASSES:
        n_eclipses = eclipses_sampled(lc, truth, true_mag)
        if n_eclipses < MIN_ECLIPSES_SAMPLED:
            return False, f"{n_eclipses} eclipse(s) sampled, fewer than {MIN_ECLIPSES_SAMPLED}"
    return True, ""
