"""Guard against a reference-count bug of PySide6 6.12 on Python 3.11.

Some PySide6 6.12 calls that return ``None`` (``QGraphicsItem.parentItem()``
of a top item, ``prepareGeometryChange()``, Python ``paint`` overrides …)
release one reference to ``None`` (or ``True``/``False``) too many.  On
Python 3.12+ these singletons are immortal and nothing happens; on 3.11 their
count falls with every repaint, and the interpreter aborts ("deallocating
None") once it reaches zero — during a long session or at exit.

:func:`protect_singletons` adds a large fixed number to their counts, as
3.12 does, so they can never reach zero.  The singletons are never freed in
any case, so this changes nothing else.
"""

from __future__ import annotations

import ctypes
import sys

__all__ = ["protect_singletons"]

_EXTRA = 1 << 40
_done = False


def protect_singletons() -> None:
    """Make ``None``, ``True`` and ``False`` effectively immortal (once)."""
    global _done
    if _done or sys.version_info >= (3, 12) or sys.implementation.name != "cpython":
        return
    for obj in (None, True, False):
        ctypes.c_ssize_t.from_address(id(obj)).value += _EXTRA
    _done = True
