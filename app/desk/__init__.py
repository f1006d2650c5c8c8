"""The vetting desk: the PySide6 + pyqtgraph window where stars are decided.

Importing this package imports Qt; the command line imports it only inside
the commands that open a window.  :class:`MainWindow` is the window.

Every computation comes from ``core`` through :class:`services.CoreServices`;
the state (ledger, current star, trial period, caches, verdict policy) is the
Qt-free :class:`core.desk.DeskModel` (``window.desk``), which every panel takes
in its constructor and listens to.  Actions are declared in :mod:`actions`;
long work runs in :mod:`workers`, analyses in worker processes (:mod:`reanalysis`).

Other views dock into the window through these extension points:

* ``window.add_view(name, widget, title=None, area=..., visible=False)`` and
  ``window.show_view(name)`` (``phasewise … --view NAME``);
* ``window.desk`` (subscribe to its ``"change"`` event for every ledger write);
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
