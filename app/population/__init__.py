"""The population view: diagnostic diagrams of the whole field, linked to the star list.

``attach(window)`` docks it into the vetting desk (``phasewise demo --view
population``); :class:`PopulationView` can also be used on its own.
"""

from ..refguard import guard_none

guard_none()  # before any Qt call (PySide6 6.12 on Python 3.11; see phasewise.app.refguard)

from .dock import VIEW_NAME, attach  # noqa: E402
from .plot import DiagramPlot  # noqa: E402
from .view import CAUTION, PopulationView  # noqa: E402

__all__ = ["PopulationView", "DiagramPlot", "CAUTION", "attach", "VIEW_NAME"]
