"""Phasewise front ends: the command line (``app.cli``) and the desktop window.

Importing this package loads no Qt; only the window modules do.  It does
guard ``None`` against a reference leak of PySide6 6.12 on Python 3.11 (see
:mod:`app.refguard`), so that every Qt window and test run lasts.
"""

from .refguard import guard_none

guard_none()
