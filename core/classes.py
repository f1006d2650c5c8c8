"""The one registry of class codes.

Every module that needs to know whether a class is periodic, eclipsing or
pulsating, which relations apply to it, or where its phase 0 lies, asks here.
Codes are the field's standard designations (RRab, DCEP, EW …); the
non-variable class is ``CONST`` (``NONVAR``, an older spelling used by truth
tables of the synthetic surveys and by early ledgers, is read as an alias).

The relations named in ``relations`` are keys of
:data:`core.physics.RELATIONS`; a test checks both directions (every relation
that applies to a class is named here, and every name here exists).
"""

from __future__ import annotations

from dataclasses import dataclass

from .errors import PhasewiseError

__all__ = [
    "ClassInfo",
    "CLASSES",
    "CLASS_CODES",
    "ALIASES",
    "EPOCH_MAXIMUM",
    "EPOCH_PRIMARY_MINIMUM",
    "canonical_code",
    "class_info",
    "is_periodic",
    "is_eclipsing",
    "is_pulsating",
    "epoch_kind",
]

#: Epoch kinds: phase 0 at maximum light (pulsators, and by convention LPVs),
#: or at the deeper minimum (eclipsing binaries).  Common practice, no source.
EPOCH_MAXIMUM = "maximum light"
EPOCH_PRIMARY_MINIMUM = "primary minimum"


@dataclass(frozen=True)
class ClassInfo:
    """What the program knows about one class code.

    Attributes
    ----------
    code, label : str
    periodic : bool
        Whether a verdict of this class records a period.
    eclipsing, pulsating : bool
    relations : tuple of str
        Names in :data:`core.physics.RELATIONS` that apply to the class
        (besides the extinction relations, which apply to any class).
    epoch_kind : str or None
        :data:`EPOCH_MAXIMUM`, :data:`EPOCH_PRIMARY_MINIMUM`, or None for a
        class without a period.
    """

    code: str
    label: str
    periodic: bool
    eclipsing: bool = False
    pulsating: bool = False
    relations: tuple[str, ...] = ()

    @property
    def epoch_kind(self) -> str | None:
        if not self.periodic:
            return None
        return EPOCH_PRIMARY_MINIMUM if self.eclipsing else EPOCH_MAXIMUM


_RR_MV = ("chaboyer99_mv", "cc03_mv")

_ALL = (
    ClassInfo(
        "RRab",
        "fundamental-mode RR Lyrae",
        True,
        pulsating=True,
        relations=("jk96_feh", "jurcsik95_zw", "carretta09_from_zw", *_RR_MV, "kw01_mv"),
    ),
    ClassInfo(
        "RRc",
        "first-overtone RR Lyrae",
        True,
        pulsating=True,
        relations=("mww07_rrc_feh", "carretta09_from_zw", *_RR_MV),
    ),
    ClassInfo("RRd", "double-mode RR Lyrae", True, pulsating=True, relations=_RR_MV),
    ClassInfo(
        "DCEP",
        "classical Cepheid, fundamental mode",
        True,
        pulsating=True,
        relations=("benedict07_pl_v", "benedict07_pw_vi"),
    ),
    ClassInfo(
        "DCEP(1O)",
        "classical Cepheid, first overtone",
        True,
        pulsating=True,
        relations=("benedict07_pl_v", "benedict07_pw_vi"),
    ),
    ClassInfo("T2CEP", "type II Cepheid", True, pulsating=True, relations=("matsunaga06_pl_ks",)),
    ClassInfo("ACEP", "anomalous Cepheid", True, pulsating=True),
    ClassInfo("DSCT", "delta Scuti", True, pulsating=True, relations=("mcnamara11_pl_v",)),
    ClassInfo("SXPHE", "SX Phoenicis", True, pulsating=True, relations=("mcnamara11_pl_v",)),
    ClassInfo("EA", "detached eclipsing binary", True, eclipsing=True),
    ClassInfo("EB", "semi-detached eclipsing binary", True, eclipsing=True),
    ClassInfo("EW", "contact eclipsing binary", True, eclipsing=True),
    ClassInfo("LPV", "long-period variable", True, pulsating=True),
    ClassInfo("CONST", "not variable", False),
    ClassInfo("UNKNOWN", "variable of unknown type", True),
    # varies by more than survey systematics, but slower than the data can
    # time (fewer than two cycles): no period is claimed
    ClassInfo("LONG", "long-period variable, period undetermined", False),
)

#: Class code -> :class:`ClassInfo`, in the order classes are offered.
CLASSES: dict[str, ClassInfo] = {c.code: c for c in _ALL}
#: The class codes, in the order classes are offered.
CLASS_CODES: tuple[str, ...] = tuple(CLASSES)
#: Other spellings read as a class code.
ALIASES: dict[str, str] = {"NONVAR": "CONST"}


def canonical_code(code: str | None) -> str | None:
    """The registry's spelling of ``code`` (aliases resolved); None stays None.

    Raises
    ------
    PhasewiseError
        For a code that is neither a class nor an alias.
    """
    if code is None or code == "":
        return None
    code = ALIASES.get(str(code).strip(), str(code).strip())
    if code not in CLASSES:
        raise PhasewiseError(
            f"unknown class {code!r}; expected one of {', '.join(CLASS_CODES)}", field="class"
        )
    return code


def class_info(code: str) -> ClassInfo:
    """The :class:`ClassInfo` of ``code`` (aliases accepted)."""
    return CLASSES[canonical_code(code)]


def _known(code: str | None) -> ClassInfo | None:
    code = ALIASES.get(code, code) if code else None
    return CLASSES.get(code) if code else None


def is_periodic(code: str | None) -> bool:
    """Whether a verdict of ``code`` records a period (unknown codes: True)."""
    info = _known(code)
    return True if info is None else info.periodic


def is_eclipsing(code: str | None) -> bool:
    info = _known(code)
    return bool(info and info.eclipsing)


def is_pulsating(code: str | None) -> bool:
    info = _known(code)
    return bool(info and info.pulsating)


def epoch_kind(code: str | None) -> str | None:
    """Where phase 0 lies for ``code``: maximum light unless eclipsing; None if aperiodic."""
    info = _known(code)
    if info is None:
        return EPOCH_MAXIMUM
    return info.epoch_kind
