"""Class suggestions with reasons, from a rulebook of ranges on named features.

``suggest(features)`` scores every class of the rulebook for one star and
returns :class:`Suggestion` objects ranked by score, each with its reasons in
plain words, the rules that argued against, and the period it implies.

Caution: suggestions come from empirical boundaries with known overlaps and
scatter, and the distances derived from a class from empirical relations with
calibration ranges; they are suggestions only — the astronomer decides.

The rulebook is TOML (data only, validated on load; see
:mod:`core.classify.rulebook`).  The shipped copy is
``core/classify/rulebook.toml``; a user copy given by path, or found at
:func:`user_rulebook_path`, replaces it.
"""

from .features import FEATURES, Feature, feature_info, features_from_result, is_known_feature
from .rulebook import (
    CLASS_CODES,
    ClassRules,
    Rule,
    Rulebook,
    Subtype,
    load_rulebook,
    parse_rulebook,
    shipped_rulebook_path,
    user_rulebook_path,
)
from .scoring import Suggestion, clean_features, suggest

__all__ = [
    "FEATURES",
    "Feature",
    "feature_info",
    "features_from_result",
    "is_known_feature",
    "CLASS_CODES",
    "ClassRules",
    "Rule",
    "Rulebook",
    "Subtype",
    "load_rulebook",
    "parse_rulebook",
    "shipped_rulebook_path",
    "user_rulebook_path",
    "Suggestion",
    "clean_features",
    "suggest",
]
