"""Per-star physical values from a class and the light-curve features.

``derive(class_code, features, settings)`` walks the relations that apply to
the class and returns :class:`PhysicalValue` records ([Fe/H], M, A, mu0,
distance), each with its error, the relation used, its citation and flags.
Errors are propagated to first order from the measured features' errors
(``period_err``, ``phi31_err``, ``A1_err``, ``A3_err``, ``mean_mag_V_err``,
``mean_mag_I_err`` when given) and the relations' coefficient errors, with the
relation's scatter added in quadrature.  A value outside a relation's
calibration range is returned *with a flag*, never silently.

Caution: these are empirical relations with known scatter and calibration
ranges; the astronomer decides.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

from ..validation import finite_or_none, require_choice, require_range
from .distance import distance_modulus, modulus_to_distance
from .relations import (
    I_BAND_WAVELENGTH_UM,
    OVERTONE_RATIO_DCEP,
    RELATIONS,
    Relation,
    ccm89_ratio,
    sine_to_cosine_phi31,
)

__all__ = ["PhysicsSettings", "PhysicalValue", "derive", "FEATURES_READ"]

#: The features :func:`derive` reads (each with its ``_err``, and the primary
#: band); the ledger keeps only these for the population's field summary.
#: ``tests/core/test_physics_derive.py`` checks that nothing else matters.
_MEASURED = ("period", "phi31", "A1", "A3", "mean_mag_V", "mean_mag_I")
FEATURES_READ = frozenset((*_MEASURED, *(f"{n}_err" for n in _MEASURED), "primary_band"))

METALLICITY_SCALES = ("ZW", "C09")
RR_MV_RELATIONS = ("chaboyer99_mv", "cc03_mv")


@dataclass(frozen=True)
class PhysicsSettings:
    """Settings of :func:`derive`.

    Parameters
    ----------
    ebv, ebv_err : float
        Colour excess E(B-V) toward the star (mag) and its error.
    rv : float
        R_V = A_V / E(B-V); 3.1 after Cardelli, Clayton & Mathis (1989).
    metallicity_scale : {"ZW", "C09"}
        The scale [Fe/H] is reported on besides the relation's own (Zinn &
        West, or Carretta et al. 2009).  M_V relations use the ZW value.
    rr_mv_relation : {"chaboyer99_mv", "cc03_mv"}
        The RR Lyrae M_V–[Fe/H] relation.
    """

    ebv: float = 0.0
    ebv_err: float = 0.0
    rv: float = 3.1
    metallicity_scale: str = "ZW"
    rr_mv_relation: str = "chaboyer99_mv"

    def __post_init__(self) -> None:
        require_range("ebv", self.ebv, 0.0, 10.0)
        require_range("ebv_err", self.ebv_err, 0.0, 10.0)
        require_range("rv", self.rv, 1.0, 10.0)
        require_choice("metallicity_scale", self.metallicity_scale, METALLICITY_SCALES)
        require_choice("rr_mv_relation", self.rr_mv_relation, RR_MV_RELATIONS)


@dataclass(frozen=True)
class PhysicalValue:
    """One derived quantity with its provenance.

    ``value`` is None when an input is missing; ``flags`` then say which.
    """

    quantity: str
    value: float | None
    err: float | None
    unit: str
    relation: str
    citation: str
    flags: tuple[str, ...] = ()

    def to_dict(self) -> dict[str, Any]:
        return {
            "quantity": self.quantity,
            "relation": self.relation,
            "value": self.value,
            "err": self.err,
            "unit": self.unit,
            "citation": self.citation,
            "flags": list(self.flags),
        }


def _num(features: Mapping[str, Any], name: str) -> float | None:
    return finite_or_none(features.get(name))


def _err(features: Mapping[str, Any], name: str) -> float:
    value = _num(features, f"{name}_err")
    return abs(value) if value is not None else 0.0


def _confidence_flags(relation: Relation) -> tuple[str, ...]:
    if relation.confidence == "memory":
        return ("relation from memory, unverified",)
    return ()


class _Builder:
    """Collects values; carries flags of inputs on to the values built from them."""

    def __init__(self) -> None:
        self.values: list[PhysicalValue] = []

    def apply(
        self,
        relation: Relation,
        inputs: Mapping[str, float | None],
        errors: Mapping[str, float],
        extra_flags: tuple[str, ...] = (),
    ) -> PhysicalValue:
        missing = [name for name in relation.inputs if inputs.get(name) is None]
        flags = list(extra_flags) + list(_confidence_flags(relation))
        if missing:
            flags.append("missing input: " + ", ".join(missing))
            result = PhysicalValue(
                relation.quantity, None, None, relation.unit, relation.name,
                relation.citation, tuple(flags),
            )  # fmt: skip
        else:
            clean = {k: float(v) for k, v in inputs.items() if v is not None}
            value, err = relation.evaluate_with_error(clean, errors)
            flags.extend(relation.range_flags(clean))
            result = PhysicalValue(
                relation.quantity, value, err, relation.unit, relation.name,
                relation.citation, tuple(flags),
            )  # fmt: skip
        self.values.append(result)
        return result

    def add(self, value: PhysicalValue) -> PhysicalValue:
        self.values.append(value)
        return value


def _inherited(*values: PhysicalValue) -> tuple[str, ...]:
    out = []
    for value in values:
        for flag in value.flags:
            if flag.startswith("outside calibration range") or flag.startswith("band"):
                out.append(f"input {value.quantity} flagged: {flag}")
            elif flag.startswith("input "):
                out.append(flag)
    return tuple(dict.fromkeys(out))


def _band_flags(features: Mapping[str, Any], relation: Relation) -> tuple[str, ...] | None:
    """None if the Fourier parameters are in another band than the relation's."""
    band = features.get("primary_band")
    if band is None:
        return (f"band of the Fourier parameters not stated; assumed {relation.band}",)
    if band != relation.band:
        return None
    return ()


def _band_mismatch(builder: _Builder, relation: Relation, band: Any) -> PhysicalValue:
    return builder.add(
        PhysicalValue(
            relation.quantity,
            None,
            None,
            relation.unit,
            relation.name,
            relation.citation,
            (
                f"band not observed: relation calibrated in {relation.band}, Fourier parameters "
                f"measured in {band}",
            ),
        )  # fmt: skip
    )


def _extinction(builder: _Builder, settings: PhysicsSettings) -> tuple[PhysicalValue, float]:
    av = builder.apply(
        RELATIONS["ccm89_av"], {"ebv": settings.ebv, "rv": settings.rv}, {"ebv": settings.ebv_err}
    )
    return av, float(av.value or 0.0)


def _distance_values(
    builder: _Builder,
    apparent: float | None,
    apparent_err: float,
    absolute: PhysicalValue,
    extinction: float,
    extinction_err: float,
    label: str,
) -> None:
    relation = f"{absolute.relation} + distance modulus"
    flags = _inherited(absolute) + tuple(
        f for f in absolute.flags if f.startswith("relation from memory")
    )
    if apparent is None or absolute.value is None:
        why = "missing input: " + (
            f"mean {label} magnitude" if apparent is None else absolute.quantity
        )
        builder.add(
            PhysicalValue("mu0", None, None, "mag", relation, absolute.citation, (*flags, why))
        )
        return
    mu, mu_err = distance_modulus(
        apparent, absolute.value, extinction, apparent_err, absolute.err or 0.0, extinction_err
    )
    d, d_err = modulus_to_distance(mu, mu_err)
    builder.add(PhysicalValue("mu0", mu, mu_err, "mag", relation, absolute.citation, flags))
    builder.add(PhysicalValue("distance", d, d_err, "pc", relation, absolute.citation, flags))


def _rr_lyrae(code: str, features: Mapping[str, Any], settings: PhysicsSettings, b: _Builder):
    period, phi31 = _num(features, "period"), _num(features, "phi31")
    errors = {"period": _err(features, "period"), "phi31": _err(features, "phi31")}
    if code == "RRab":
        relation = RELATIONS["jk96_feh"]
        band_flags = _band_flags(features, relation)
        if band_flags is None:
            _band_mismatch(b, relation, features.get("primary_band"))
            return
        jk = b.apply(relation, {"period": period, "phi31": phi31}, errors, band_flags)
        zw_rel = RELATIONS["jurcsik95_zw"]
        zw = b.apply(zw_rel, {"feh_jk": jk.value}, {"feh_jk": jk.err or 0.0}, _inherited(jk))
    elif code == "RRc":
        relation = RELATIONS["mww07_rrc_feh"]
        band_flags = _band_flags(features, relation)
        if band_flags is None:
            _band_mismatch(b, relation, features.get("primary_band"))
            return
        phi31_cos = sine_to_cosine_phi31(phi31) if phi31 is not None else None
        zw = b.apply(
            relation,
            {"period": period, "phi31_cos": phi31_cos},
            {"period": errors["period"], "phi31_cos": errors["phi31"]},
            band_flags + ("phi31 converted from sine to cosine form (+pi)",),
        )
    else:
        return  # RRd: no photometric [Fe/H] relation in the registry
    if settings.metallicity_scale == "C09":
        b.apply(
            RELATIONS["carretta09_from_zw"], {"feh_zw": zw.value}, {"feh_zw": zw.err or 0.0},
            _inherited(zw),
        )  # fmt: skip
    mv_rel = RELATIONS[settings.rr_mv_relation]
    mv = b.apply(mv_rel, {"feh": zw.value}, {"feh": zw.err or 0.0}, _inherited(zw))
    av, a_v = _extinction(b, settings)
    v_mean, v_err = _num(features, "mean_mag_V"), _err(features, "mean_mag_V")
    _distance_values(b, v_mean, v_err, mv, a_v, av.err or 0.0, "V")
    if code == "RRab" and _num(features, "A1") is not None:
        kw = RELATIONS["kw01_mv"]
        kw_flags = _band_flags(features, kw)
        if kw_flags is not None:
            mv_lc = b.apply(
                kw,
                {"period": period, "A1": _num(features, "A1"), "A3": _num(features, "A3")},
                {
                    "period": errors["period"],
                    "A1": _err(features, "A1"),
                    "A3": _err(features, "A3"),
                },
                kw_flags,
            )
            _distance_values(b, v_mean, v_err, mv_lc, a_v, av.err or 0.0, "V")


def _cepheid(code: str, features: Mapping[str, Any], settings: PhysicsSettings, b: _Builder):
    period = _num(features, "period")
    period_err = _err(features, "period")
    flags: tuple[str, ...] = ()
    if code == "DCEP(1O)" and period is not None:
        period, period_err = period / OVERTONE_RATIO_DCEP, period_err / OVERTONE_RATIO_DCEP
        flags = (
            f"fundamentalised: P0 = P1/{OVERTONE_RATIO_DCEP} = {period:.4g} d "
            "(ratio from Alcock et al. 1995)",
        )
    inputs = {"period_fundamental": period}
    errors = {"period_fundamental": period_err}
    v_mean, i_mean = _num(features, "mean_mag_V"), _num(features, "mean_mag_I")
    if v_mean is not None and i_mean is not None:
        # Reddening-free: no extinction term.  Listed first as the preferred distance.
        pw = RELATIONS["benedict07_pw_vi"]
        r = pw.coefficients["R"]
        mw = b.apply(pw, inputs, errors, flags)
        w_obs = v_mean - r * (v_mean - i_mean)
        w_err = math.hypot((1 - r) * _err(features, "mean_mag_V"), r * _err(features, "mean_mag_I"))
        _distance_values(b, w_obs, w_err, mw, 0.0, 0.0, "W")
    mv = b.apply(RELATIONS["benedict07_pl_v"], inputs, errors, flags)
    av, a_v = _extinction(b, settings)
    _distance_values(b, v_mean, _err(features, "mean_mag_V"), mv, a_v, av.err or 0.0, "V")


def _type2_cepheid(features: Mapping[str, Any], b: _Builder):
    relation = RELATIONS["matsunaga06_pl_ks"]
    flags = ("band not observed: Ks relation; no Ks photometry, so no distance is derived",)
    b.apply(
        relation, {"period": _num(features, "period")}, {"period": _err(features, "period")}, flags
    )


def _delta_scuti(features: Mapping[str, Any], settings: PhysicsSettings, b: _Builder):
    relation = RELATIONS["mcnamara11_pl_v"]
    mv = b.apply(
        relation, {"period": _num(features, "period")}, {"period": _err(features, "period")}
    )
    av, a_v = _extinction(b, settings)
    _distance_values(
        b, _num(features, "mean_mag_V"), _err(features, "mean_mag_V"), mv, a_v, av.err or 0.0, "V"
    )


def derive(
    class_code: str, features: Mapping[str, Any], settings: PhysicsSettings | None = None
) -> tuple[PhysicalValue, ...]:
    """Physical values implied by a class for one star.

    Parameters
    ----------
    class_code : str
        The class (suggested or decided), e.g. ``"RRab"``.
    features : mapping
        The star's features (see :data:`core.classify.FEATURES`), with
        optional ``<name>_err`` errors.
    settings : PhysicsSettings, optional

    Returns
    -------
    tuple of PhysicalValue
        Empty for classes without relations (ACEP, eclipsing, LPV, CONST,
        UNKNOWN).  For DCEP the reddening-free Wesenheit distance, when V and
        I exist, comes before the V one.
    """
    settings = settings or PhysicsSettings()
    builder = _Builder()
    if class_code in ("RRab", "RRc", "RRd"):
        _rr_lyrae(class_code, features, settings, builder)
    elif class_code in ("DCEP", "DCEP(1O)"):
        _cepheid(class_code, features, settings, builder)
    elif class_code == "T2CEP":
        _type2_cepheid(features, builder)
    elif class_code in ("DSCT", "SXPHE"):
        _delta_scuti(features, settings, builder)
    return tuple(builder.values)


def extinction_ratio_i(rv: float = 3.1) -> float:
    """A_I / A_V from CCM89 at the I band's wavelength."""
    return ccm89_ratio(I_BAND_WAVELENGTH_UM, rv)
