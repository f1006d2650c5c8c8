"""Phasewise front ends: the command line (``phasewise.app.cli``) and the desktop window.

Importing this package loads no Qt and changes nothing in the process.  The
window packages (``phasewise.app.desk``, ``phasewise.app.population``) guard
``None`` against a reference leak of PySide6 6.12 on Python 3.11 when they are
imported (see :mod:`phasewise.app.refguard`).
"""
