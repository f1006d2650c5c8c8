"""The vetting desk: the PySide6 + pyqtgraph window where stars are decided.

Importing this package imports Qt; the command line imports it only inside
the commands that open a window.  :class:`MainWindow` is the window.

Every computation comes from ``core`` through :class:`services.CoreServices`;
the session state (current star, trial period, candidates) is the plain
:class:`core.vetting.VettingSession`.  Long work runs in :mod:`workers`.

Other views dock into the window through these extension points:

* ``window.add_view(name, widget, title=None, area=..., visible=False)`` and
  ``window.show_view(name)`` (``phasewise … --view NAME``);
* ``window.select_star(id)``, ``window.select_stars(ids)``,
  ``window.visible_star_ids()``, ``window.current_star``, ``window.ledger``;
* signals ``starChanged(str)``, ``ledgerChanged()``, ``verdictChanged(str)``,
  ``filterChanged()``;
* ``window.star_list.model.update_star(id, flags=…)`` to show a flag in the list;
* a package ``app.population`` with ``attach(window)`` is attached by the
  window commands when present.
"""

# PySide6 6.12 on Python 3.11 drops references to None/True/False (see
# phasewise.app.refguard): guard them before any Qt call of the window.
from ..refguard import guard_none

guard_none()

from .main_window import MainWindow  # noqa: E402

__all__ = ["MainWindow"]
