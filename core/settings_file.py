"""Analysis settings from a TOML file, and back from a stored settings dict.

A settings file mirrors the nested settings dataclasses: top-level keys are
the fields of :class:`core.analysis.AnalysisSettings`, tables are its nested
settings (``[periodogram]``, ``[fourier]``, ...)::

    fap_threshold = 0.001

    [periodogram]
    method = "mhgls"
    oversampling = 10

Keys left out keep their defaults.  An unknown key is an error naming it;
values are checked by the dataclasses themselves.  The file is parsed as
data (``tomllib``); nothing in it is evaluated.
"""

from __future__ import annotations

import dataclasses
import tomllib
from collections.abc import Mapping
from pathlib import Path
from typing import Any

from .errors import PhasewiseError

__all__ = ["load_settings", "settings_from_dict", "ledger_settings"]


def load_settings(path: str | Path):
    """Read :class:`~core.analysis.AnalysisSettings` from a TOML file.

    Raises
    ------
    PhasewiseError
        The file is missing or not TOML, a key is unknown, or a value is
        refused by the settings (the message names the file and the key).
    """
    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8")
    except OSError as exc:
        raise PhasewiseError(f"cannot read the settings file: {exc.strerror}", file=path) from exc
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise PhasewiseError(f"not a valid TOML file: {exc}", file=path) from exc
    return settings_from_dict(data, source=str(path))


def settings_from_dict(data: Mapping[str, Any], *, source: str | None = None):
    """Build :class:`~core.analysis.AnalysisSettings` from a nested mapping.

    Accepts what ``AnalysisSettings.to_dict()`` gives (so settings stored in
    a ledger come back) and what a TOML file holds.
    """
    from .analysis import AnalysisSettings

    return _build(AnalysisSettings, data, prefix="", source=source)


def ledger_settings(ledger, *, source: str | None = None):
    """The analysis settings a ledger's results were last computed with.

    The defaults when the ledger records none.  Raises
    :class:`~core.errors.SettingsError` (naming the field) when the stored
    settings no longer fit this version's settings.
    """
    from .analysis import AnalysisSettings

    stored = ledger.analysis_settings()
    if stored is None:
        return AnalysisSettings()
    return settings_from_dict(stored[0], source=source)


def _build(cls: type, data: Any, *, prefix: str, source: str | None):
    where = prefix.rstrip(".") or None
    if not isinstance(data, Mapping):
        raise PhasewiseError(
            f"expected a table of settings, got {type(data).__name__}", file=source, field=where
        )
    fields = {f.name: f for f in dataclasses.fields(cls) if f.init}
    unknown = [key for key in data if key not in fields]
    if unknown:
        name = f"{prefix}{unknown[0]}"
        known = ", ".join(sorted(fields))
        raise PhasewiseError(
            f"unknown setting {name!r}; expected one of: {known}", file=source, field=name
        )
    values: dict[str, Any] = {}
    for key, value in data.items():
        default = _default_of(fields[key])
        if dataclasses.is_dataclass(default) and not isinstance(default, type):
            values[key] = _build(type(default), value, prefix=f"{prefix}{key}.", source=source)
        elif isinstance(default, tuple) and isinstance(value, list):
            values[key] = tuple(value)
        else:
            values[key] = value
    try:
        return cls(**values)
    except PhasewiseError as exc:
        field = f"{prefix}{exc.field}" if exc.field else where
        raise PhasewiseError(exc.reason, file=source, field=field) from exc
    except (TypeError, ValueError) as exc:
        raise PhasewiseError(f"refused: {exc}", file=source, field=where) from exc


def _default_of(field: dataclasses.Field) -> Any:
    if field.default is not dataclasses.MISSING:
        return field.default
    if field.default_factory is not dataclasses.MISSING:
        return field.default_factory()
    return None
