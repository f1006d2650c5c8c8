"""Phasewise front ends: the command line (``app.cli``) and the desktop window.

Importing this package loads no Qt; only the window modules do.
"""
