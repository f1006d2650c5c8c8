"""Physical parameters from published relations: [Fe/H], M, extinction, distance.

Relations are data records in one registry (:data:`RELATIONS`), each with its
citation, band, series form, coefficients, calibration range and scatter.
:func:`derive` applies the ones that fit a class to one star;
:func:`population_summary` summarises a set of stars.

Caution: suggestions and distances come from empirical relations with known
scatter and calibration ranges; values outside a range are flagged, and the
astronomer decides.
"""

from .derive import PhysicalValue, PhysicsSettings, derive, extinction_ratio_i
from .distance import distance_modulus, distance_to_modulus, modulus_to_distance
from .population import (
    ClassDistance,
    PopulationSummary,
    StarPhysics,
    class_distance,
    population_summary,
)
from .relations import (
    I_BAND_WAVELENGTH_UM,
    OVERTONE_RATIO_DCEP,
    RELATIONS,
    Example,
    Relation,
    ccm89_ratio,
    get_relation,
    sine_to_cosine_phi31,
)

__all__ = [
    "RELATIONS",
    "Relation",
    "Example",
    "get_relation",
    "ccm89_ratio",
    "sine_to_cosine_phi31",
    "I_BAND_WAVELENGTH_UM",
    "OVERTONE_RATIO_DCEP",
    "PhysicsSettings",
    "PhysicalValue",
    "derive",
    "extinction_ratio_i",
    "distance_modulus",
    "modulus_to_distance",
    "distance_to_modulus",
    "StarPhysics",
    "ClassDistance",
    "PopulationSummary",
    "class_distance",
    "population_summary",
]
