"""The registry of published relations, as data records.

Each :class:`Relation` holds its name, citation, band, Fourier series form
(where it matters), coefficients with their errors, calibration range per
input, scatter, the classes it applies to and a worked example.  The formula
itself is one of a few small kernels named by ``kernel``; nothing is parsed or
evaluated from text.

Caution: these are empirical relations with known scatter and calibration
ranges; values outside the range are flagged, not hidden, and the astronomer
decides what to believe.

Confidence follows the project's REFERENCES list: ``paper`` (read in the
source), ``secondary`` (quoted by later work), ``memory`` (from memory,
unverified).
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from typing import Any

__all__ = [
    "Relation",
    "Example",
    "RELATIONS",
    "get_relation",
    "ccm89_ratio",
    "sine_to_cosine_phi31",
    "I_BAND_WAVELENGTH_UM",
    "OVERTONE_RATIO_DCEP",
]

#: Effective wavelength used for the I band (Cousins I, about 0.80 µm;
#: common practice, no source).
I_BAND_WAVELENGTH_UM = 0.80

#: First-overtone / fundamental period ratio of classical Cepheids used to
#: fundamentalise DCEP(1O) periods: P0 = P1 / 0.72 (Alcock et al. 1995, LMC).
OVERTONE_RATIO_DCEP = 0.72

# Input names → (symbol used in flags, unit).
INPUT_LABELS = {
    "period": ("P", "d"),
    "period_fundamental": ("P0", "d"),
    "log_period": ("log P", ""),
    "phi31": ("phi31(sine)", "rad"),
    "phi31_cos": ("phi31(cosine)", "rad"),
    "A1": ("A1", "mag"),
    "A3": ("A3", "mag"),
    "feh_jk": ("[Fe/H]_JK", "dex"),
    "feh_zw": ("[Fe/H]_ZW", "dex"),
    "feh": ("[Fe/H]", "dex"),
    "ebv": ("E(B-V)", "mag"),
    "rv": ("R_V", ""),
    "wavelength_um": ("lambda", "µm"),
}


def sine_to_cosine_phi31(phi31_sine: float) -> float:
    """phi31(cos) = phi31(sin) + pi (mod 2 pi), since cos x = sin(x + pi/2)."""
    return (phi31_sine + math.pi) % (2 * math.pi)


def ccm89_ratio(wavelength_um: float, rv: float = 3.1) -> float:
    """A_lambda / A_V of Cardelli, Clayton & Mathis (1989), eqs. 2–3.

    Valid for 0.3 <= x <= 3.3 µm^-1 (x = 1 / lambda); the infrared branch
    (x < 1.1) and the optical/near-IR branch (1.1 <= x <= 3.3) are included.
    """
    x = 1.0 / wavelength_um
    if 0.3 <= x < 1.1:
        a = 0.574 * x**1.61
        b = -0.527 * x**1.61
    elif 1.1 <= x <= 3.3:
        y = x - 1.82
        a = (
            1
            + 0.17699 * y
            - 0.50447 * y**2
            - 0.02427 * y**3
            + 0.72085 * y**4
            + 0.01979 * y**5
            - 0.77530 * y**6
            + 0.32999 * y**7
        )
        b = (
            1.41338 * y
            + 2.28305 * y**2
            + 1.07233 * y**3
            - 5.38434 * y**4
            - 0.62251 * y**5
            + 5.30260 * y**6
            - 2.09002 * y**7
        )
    else:
        raise ValueError(f"wavelength {wavelength_um} µm is outside the CCM89 range 0.303–3.33 µm")
    return a + b / rv


# ------------------------------------------------------------------ kernels
# Each kernel takes the inputs and the coefficients as mappings.

Kernel = Callable[[Mapping[str, float], Mapping[str, float]], float]

KERNELS: dict[str, Kernel] = {
    "jk96": lambda x, c: c["a"] + c["b"] * x["period"] + c["c"] * x["phi31"],
    "linear_feh_jk": lambda x, c: c["slope"] * x["feh_jk"] + c["zp"],
    "quadratic_feh_zw": lambda x, c: c["a"] + c["b"] * x["feh_zw"] + c["c"] * x["feh_zw"] ** 2,
    "mww07": lambda x, c: (
        c["p2"] * x["period"] ** 2
        + c["p"] * x["period"]
        + c["f2"] * x["phi31_cos"] ** 2
        + c["f"] * x["phi31_cos"]
        + c["pf"] * x["period"] * x["phi31_cos"]
        + c["zp"]
    ),
    "mv_feh": lambda x, c: c["slope"] * (x["feh"] - c["feh_ref"]) + c["zp"],
    "kw01": lambda x, c: (
        c["logp"] * math.log10(x["period"]) + c["a1"] * x["A1"] + c["a3"] * x["A3"] + c["K"]
    ),
    "pl": lambda x, c: c["zp"] + c["slope"] * (math.log10(x["period"]) - c["pivot"]),
    "pl_fundamental": lambda x, c: (
        c["zp"] + c["slope"] * (math.log10(x["period_fundamental"]) - c["pivot"])
    ),
    "pl_plain": lambda x, c: c["slope"] * math.log10(x["period"]) + c["zp"],
    "extinction_v": lambda x, c: x["rv"] * x["ebv"],
    "ccm89": lambda x, c: ccm89_ratio(x["wavelength_um"], x["rv"]),
}


@dataclass(frozen=True)
class Example:
    """A worked number: inputs, expected value, tolerance and where it is from."""

    inputs: Mapping[str, float]
    expected: float
    tolerance: float
    source: str


@dataclass(frozen=True)
class Relation:
    """One published relation as a data record.

    ``valid`` maps each input to its calibration range (low, high);
    ``coefficient_errors`` holds the published 1-sigma errors of coefficients
    (propagated like measured errors); ``scatter`` is the relation's own
    scatter, added in quadrature.
    """

    name: str
    quantity: str
    unit: str
    formula: str
    kernel: str
    inputs: tuple[str, ...]
    coefficients: Mapping[str, float]
    valid: Mapping[str, tuple[float, float]]
    scatter: float
    band: str
    form: str | None
    applies_to: tuple[str, ...]
    citation: str
    confidence: str
    example: Example
    coefficient_errors: Mapping[str, float] = field(default_factory=dict)
    notes: str = ""

    def evaluate(self, inputs: Mapping[str, float]) -> float:
        """The relation's value at ``inputs`` (no range check)."""
        return float(KERNELS[self.kernel](inputs, self.coefficients))

    def evaluate_with_error(
        self, inputs: Mapping[str, float], errors: Mapping[str, float] | None = None
    ) -> tuple[float, float]:
        """Value and 1-sigma error: input errors and coefficient errors are
        propagated to first order (numerical derivatives), and the scatter is
        added in quadrature."""
        errors = errors or {}
        value = self.evaluate(inputs)
        variance = self.scatter**2
        for name, sigma in errors.items():
            if sigma and name in self.inputs:
                variance += (self._derivative(inputs, name, is_input=True) * sigma) ** 2
        for name, sigma in self.coefficient_errors.items():
            if sigma:
                variance += (self._derivative(inputs, name, is_input=False) * sigma) ** 2
        return value, math.sqrt(variance)

    def _derivative(self, inputs: Mapping[str, float], name: str, *, is_input: bool) -> float:
        source = dict(inputs) if is_input else dict(self.coefficients)
        step = 1e-6 * max(1.0, abs(source[name]))
        up, down = dict(source), dict(source)
        up[name] += step
        down[name] -= step
        kernel = KERNELS[self.kernel]
        if is_input:
            return (kernel(up, self.coefficients) - kernel(down, self.coefficients)) / (2 * step)
        return (kernel(inputs, up) - kernel(inputs, down)) / (2 * step)

    def range_flags(self, inputs: Mapping[str, float]) -> tuple[str, ...]:
        """One flag per input outside the calibration range, in plain words."""
        flags = []
        for name, (low, high) in self.valid.items():
            value = inputs.get(name)
            if value is None or low <= value <= high:
                continue
            symbol, unit = INPUT_LABELS.get(name, (name, ""))
            unit = f" {unit}" if unit else ""
            flags.append(
                f"outside calibration range: {symbol} = {value:.3g}{unit}, "
                f"valid {low:g}–{high:g}{unit}"
            )
        return tuple(flags)

    def to_dict(self) -> dict[str, Any]:
        return {
            "name": self.name,
            "quantity": self.quantity,
            "unit": self.unit,
            "formula": self.formula,
            "inputs": list(self.inputs),
            "coefficients": dict(self.coefficients),
            "coefficient_errors": dict(self.coefficient_errors),
            "valid": {k: list(v) for k, v in self.valid.items()},
            "scatter": self.scatter,
            "band": self.band,
            "form": self.form,
            "applies_to": list(self.applies_to),
            "citation": self.citation,
            "confidence": self.confidence,
            "notes": self.notes,
        }


_RR = ("RRab", "RRc", "RRd")

RELATIONS: dict[str, Relation] = {
    r.name: r
    for r in (
        Relation(
            name="jk96_feh",
            quantity="[Fe/H]_JK",
            unit="dex",
            formula="[Fe/H]_JK = -5.038 - 5.394 P + 1.345 phi31(sine)",
            kernel="jk96",
            inputs=("period", "phi31"),
            coefficients={"a": -5.038, "b": -5.394, "c": 1.345},
            # Calibration range and scatter: from memory (JK96 calibrators).
            valid={"period": (0.30, 0.85), "phi31": (4.0, 6.5)},
            scatter=0.14,
            band="V",
            form="sine",
            applies_to=("RRab",),
            citation="Jurcsik & Kovács 1996, A&A 312, 111",
            confidence="secondary",
            example=Example(
                {"period": 0.55, "phi31": 5.0}, -1.280, 0.001, "REFERENCES.md worked number"
            ),
            notes="scatter 0.14 dex and calibration range from memory",
        ),
        Relation(
            name="jurcsik95_zw",
            quantity="[Fe/H]_ZW",
            unit="dex",
            formula="[Fe/H]_ZW = 0.6988 [Fe/H]_JK - 0.615",
            kernel="linear_feh_jk",
            inputs=("feh_jk",),
            coefficients={"slope": 0.6988, "zp": -0.615},
            valid={"feh_jk": (-3.0, 0.5)},
            scatter=0.0,
            band="",
            form=None,
            applies_to=("RRab",),
            citation="Jurcsik 1995, AcA 45, 653",
            confidence="secondary",
            example=Example(
                {"feh_jk": -1.2802}, -1.509, 0.001, "REFERENCES.md worked number (JK96 → ZW)"
            ),
            notes="a scale conversion: its own scatter is not included; range from memory",
        ),
        Relation(
            name="carretta09_from_zw",
            quantity="[Fe/H]_C09",
            unit="dex",
            formula="[Fe/H]_C09 = -0.413 + 0.130 Z - 0.356 Z^2, Z = [Fe/H]_ZW",
            kernel="quadratic_feh_zw",
            inputs=("feh_zw",),
            coefficients={"a": -0.413, "b": 0.130, "c": -0.356},
            valid={"feh_zw": (-2.5, -0.3)},
            scatter=0.0,
            band="",
            form=None,
            applies_to=("RRab", "RRc"),
            citation="Carretta et al. 2009, A&A 508, 695",
            confidence="secondary",
            # -0.413 + 0.130*(-1.5) - 0.356*2.25 = -1.409 (arithmetic of the formula)
            example=Example({"feh_zw": -1.5}, -1.409, 0.0005, "formula arithmetic"),
            notes="a scale conversion: its own scatter is not included; range from memory",
        ),
        Relation(
            name="mww07_rrc_feh",
            quantity="[Fe/H]_ZW",
            unit="dex",
            formula=(
                "[Fe/H]_ZW = 52.466 P^2 - 30.075 P + 0.131 phi31^2 + 0.982 phi31 "
                "- 4.198 P phi31 + 2.424, phi31 in the COSINE form"
            ),
            kernel="mww07",
            inputs=("period", "phi31_cos"),
            coefficients={
                "p2": 52.466,
                "p": -30.075,
                "f2": 0.131,
                "f": 0.982,
                "pf": -4.198,
                "zp": 2.424,
            },
            # Calibration range and scatter: from memory.
            valid={"period": (0.2, 0.45), "phi31_cos": (2.5, 5.5)},
            scatter=0.145,
            band="V",
            form="cosine",
            applies_to=("RRc",),
            citation="Morgan, Wahl & Wieckhorst 2007, MNRAS 374, 1421",
            confidence="secondary",
            example=Example(
                {"period": 0.32, "phi31_cos": 4.0}, -1.177, 0.001, "REFERENCES.md worked number"
            ),
            notes="our phi31 is sine: phi31(cos) = phi31(sin) + pi (mod 2 pi) before use; "
            "scatter and range from memory",
        ),
        Relation(
            name="chaboyer99_mv",
            quantity="M_V",
            unit="mag",
            formula="M_V = 0.23 ([Fe/H] + 1.6) + 0.56",
            kernel="mv_feh",
            inputs=("feh",),
            coefficients={"slope": 0.23, "feh_ref": -1.6, "zp": 0.56},
            coefficient_errors={"slope": 0.04, "zp": 0.12},
            valid={"feh": (-2.5, -0.5)},
            scatter=0.0,
            band="V",
            form=None,
            applies_to=_RR,
            citation="Chaboyer 1999, astro-ph/9808202",
            confidence="paper",
            example=Example(
                {"feh": -1.6}, 0.56, 1e-9, "Chaboyer 1999: zero point at [Fe/H] = -1.6"
            ),
            notes="uncertainty is carried by the coefficient errors (±0.04, ±0.12); "
            "[Fe/H] range from memory",
        ),
        Relation(
            name="cc03_mv",
            quantity="M_V",
            unit="mag",
            formula="M_V = 0.23 ([Fe/H] + 1.5) + 0.59",
            kernel="mv_feh",
            inputs=("feh",),
            coefficients={"slope": 0.23, "feh_ref": -1.5, "zp": 0.59},
            coefficient_errors={"slope": 0.04, "zp": 0.03},
            valid={"feh": (-2.5, -0.5)},
            scatter=0.0,
            band="V",
            form=None,
            applies_to=_RR,
            citation="Cacciari & Clementini 2003, astro-ph/0301550",
            confidence="paper",
            example=Example(
                {"feh": -1.5}, 0.59, 1e-9, "Cacciari & Clementini 2003: M_V = 0.59 at -1.5"
            ),
            notes="zero point from the paper; slope 0.23 ± 0.04 and range from memory",
        ),
        Relation(
            name="kw01_mv",
            quantity="M_V",
            unit="mag",
            formula="M_V = -1.876 log P - 1.158 A1 + 0.821 A3 + 0.43",
            kernel="kw01",
            inputs=("period", "A1", "A3"),
            coefficients={"logp": -1.876, "a1": -1.158, "a3": 0.821, "K": 0.43},
            valid={"period": (0.35, 0.85), "A1": (0.1, 0.5), "A3": (0.02, 0.2)},
            scatter=0.04,
            band="V",
            form="sine",
            applies_to=("RRab",),
            citation="Kovács & Walker 2001, A&A 371, 579",
            confidence="secondary",
            # -1.876 log10(0.55) - 1.158*0.3 + 0.821*0.1 + 0.43 = 0.6518 (arithmetic)
            example=Example(
                {"period": 0.55, "A1": 0.3, "A3": 0.1}, 0.6518, 0.0005, "formula arithmetic"
            ),
            notes="scatter and calibration range from memory",
        ),
        Relation(
            name="benedict07_pl_v",
            quantity="M_V",
            unit="mag",
            formula="M_V = -4.05 - 2.43 (log P0 - 1)",
            kernel="pl_fundamental",
            inputs=("period_fundamental",),
            coefficients={"zp": -4.05, "slope": -2.43, "pivot": 1.0},
            coefficient_errors={"zp": 0.02, "slope": 0.12},
            valid={"period_fundamental": (3.7, 35.6)},
            scatter=0.10,
            band="V",
            form=None,
            applies_to=("DCEP", "DCEP(1O)"),
            citation="Benedict et al. 2007, AJ 133, 1810 (HST parallaxes)",
            confidence="secondary",
            example=Example(
                {"period_fundamental": 10.0}, -4.05, 1e-9, "Benedict et al. 2007 zero point"
            ),
            notes="1O periods fundamentalised with P0 = P1/0.72 (Alcock et al. 1995); "
            "scatter 0.10 mag from memory",
        ),
        Relation(
            name="benedict07_pw_vi",
            quantity="M_W",
            unit="mag",
            formula="M_W = -5.63 - 3.34 (log P0 - 1), W = V - 2.45 (V - I)",
            kernel="pl_fundamental",
            inputs=("period_fundamental",),
            coefficients={"zp": -5.63, "slope": -3.34, "pivot": 1.0, "R": 2.45},
            valid={"period_fundamental": (3.7, 35.6)},
            scatter=0.08,
            band="W(V,I)",
            form=None,
            applies_to=("DCEP", "DCEP(1O)"),
            citation="Benedict et al. 2007, AJ 133, 1810 (Wesenheit V,I form)",
            confidence="memory",
            example=Example(
                {"period_fundamental": 10.0}, -5.63, 1e-9, "from memory: zero point at P0 = 10 d"
            ),
            notes="coefficients, R = 2.45 and scatter from memory, unverified",
        ),
        Relation(
            name="matsunaga06_pl_ks",
            quantity="M_Ks",
            unit="mag",
            formula="M_Ks = -2.41 (log P - 1.2) - 4.00",
            kernel="pl",
            inputs=("period",),
            coefficients={"zp": -4.00, "slope": -2.41, "pivot": 1.2},
            coefficient_errors={"zp": 0.02, "slope": 0.05},
            valid={"period": (1.0, 30.0)},
            scatter=0.14,
            band="Ks",
            form=None,
            applies_to=("T2CEP",),
            citation="Matsunaga et al. 2006, MNRAS 370, 1979",
            confidence="secondary",
            example=Example(
                {"period": 10**1.2}, -4.00, 1e-9, "Matsunaga et al. 2006 zero point at log P = 1.2"
            ),
            notes="Ks band: needs Ks photometry; scatter and period range from memory",
        ),
        Relation(
            name="mcnamara11_pl_v",
            quantity="M_V",
            unit="mag",
            formula="M_V = -2.89 log P - 1.31",
            kernel="pl_plain",
            inputs=("period",),
            coefficients={"slope": -2.89, "zp": -1.31},
            valid={"period": (0.03, 0.25)},
            scatter=0.10,
            band="V",
            form=None,
            applies_to=("DSCT", "SXPHE"),
            citation="McNamara 2011, AJ 142, 110",
            confidence="memory",
            # -2.89 * log10(0.1) - 1.31 = 1.58 (arithmetic of the memory formula)
            example=Example({"period": 0.1}, 1.58, 1e-9, "formula arithmetic (from memory)"),
            notes="coefficients, scatter and range from memory, unverified",
        ),
        Relation(
            name="ccm89_av",
            quantity="A_V",
            unit="mag",
            formula="A_V = R_V E(B-V)",
            kernel="extinction_v",
            inputs=("ebv", "rv"),
            coefficients={},
            valid={"ebv": (0.0, 5.0), "rv": (2.0, 6.0)},
            scatter=0.0,
            band="V",
            form=None,
            applies_to=("*",),
            citation="Cardelli, Clayton & Mathis 1989, ApJ 345, 245",
            confidence="paper",
            example=Example(
                {"ebv": 0.1, "rv": 3.1}, 0.31, 1e-12, "REFERENCES.md worked arithmetic"
            ),
            notes="R_V = 3.1 by default (diffuse interstellar medium); no scatter of its own: "
            "the uncertainty enters through E(B-V)",
        ),
        Relation(
            name="ccm89_ratio",
            quantity="A_lambda/A_V",
            unit="",
            formula="A_lambda/A_V = a(x) + b(x)/R_V, x = 1/lambda (µm^-1)",
            kernel="ccm89",
            inputs=("wavelength_um", "rv"),
            coefficients={},
            valid={"wavelength_um": (0.303, 3.33), "rv": (2.0, 6.0)},
            scatter=0.0,
            band="",
            form=None,
            applies_to=("*",),
            citation="Cardelli, Clayton & Mathis 1989, ApJ 345, 245",
            confidence="paper",
            # CCM89 Table 3: A(I)/A(V) = 0.479 at 0.90 µm (value from memory).
            example=Example(
                {"wavelength_um": 0.90, "rv": 3.1}, 0.479, 0.002, "CCM89 Table 3 (from memory)"
            ),
            notes=f"the I band is taken at {I_BAND_WAVELENGTH_UM} µm; the scatter of real sight lines "
            "about the mean curve is not included",
        ),
    )
}


def get_relation(name: str) -> Relation:
    """The relation called ``name``; a KeyError lists the known names."""
    try:
        return RELATIONS[name]
    except KeyError:
        raise KeyError(f"unknown relation {name!r}; known: {', '.join(RELATIONS)}") from None
