"""Helpers shared by every settings dataclass.

Settings are frozen dataclasses with defaults, validated in ``__post_init__``
through :mod:`core.validation`.  Their :func:`settings_hash` is stored with
every result so that results computed with other settings show as stale.
"""

from __future__ import annotations

import dataclasses
import hashlib
import json
from typing import Any

__all__ = ["settings_to_dict", "settings_hash"]


def _plain(value: Any) -> Any:
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        return {f.name: _plain(getattr(value, f.name)) for f in dataclasses.fields(value)}
    if isinstance(value, (list, tuple)):
        return [_plain(v) for v in value]
    if isinstance(value, dict):
        return {str(k): _plain(v) for k, v in sorted(value.items())}
    if hasattr(value, "item") and callable(value.item):  # numpy scalar
        return value.item()
    return value


def settings_to_dict(settings: Any) -> dict[str, Any]:
    """A settings dataclass (possibly nested) as a plain JSON-able dict."""
    return _plain(settings)


def settings_hash(settings: Any) -> str:
    """A short stable hash of a settings dataclass (16 hex digits)."""
    text = json.dumps(settings_to_dict(settings), sort_keys=True, separators=(",", ":"))
    return hashlib.sha256(text.encode("utf-8")).hexdigest()[:16]
