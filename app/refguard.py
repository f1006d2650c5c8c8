"""Keep ``None``, ``True`` and ``False`` alive for a whole session (PySide6 6.12, Python 3.11).

PySide6 6.12 hands back ``None`` from Qt methods that return nothing
(``QPainter.setPen``, ``QWidget.setEnabled`` …), and ``True``/``False`` from
some that return a bool, without taking a reference.  On Python 3.12 and later
these objects are immortal and this does no harm; on Python 3.11 every such
call lowers their reference count by one, and a window that paints for a while
ends with "Fatal Python error: none_dealloc: deallocating None" (or
``bool_dealloc``).  Measured here: about one lost reference per painter call,
a few thousand per repaint of a plot.

:func:`guard_none` raises the reference count of the objects that Python 3.12
makes immortal (``None``, ``True``, ``False``, ``Ellipsis``,
``NotImplemented``, the small integers −5…256 and the empty tuple, string and
bytes) by 2**40 once, which is what Python 3.12 does by design.  It touches
nothing else, is a no-op on 3.12+ and on interpreters other than CPython, and
loads no Qt.
"""

from __future__ import annotations

import ctypes
import sys

__all__ = ["guard_none"]

_GUARDED = False


def guard_none() -> None:
    """Make the singletons' reference counts unreachable by the leak (once per process)."""
    global _GUARDED
    if _GUARDED or sys.implementation.name != "cpython" or sys.version_info >= (3, 12):
        return
    singletons = [None, True, False, Ellipsis, NotImplemented, (), "", b""]
    singletons += list(range(-5, 257))  # CPython's cached small integers
    for obj in singletons:
        # ob_refcnt is the first field of every PyObject in a release build of CPython 3.11
        refcount = ctypes.c_ssize_t.from_address(id(obj))
        refcount.value += 1 << 40
    _GUARDED = True
