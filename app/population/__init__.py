"""The population view: diagnostic diagrams of the whole field, linked to the star list.

``attach(window)`` docks it into the vetting desk (``phasewise demo --view
population``); :class:`PopulationView` can also be used on its own.
"""

from .dock import VIEW_NAME, attach
from .plot import DiagramPlot
from .view import CAUTION, PopulationView

__all__ = ["PopulationView", "DiagramPlot", "CAUTION", "attach", "VIEW_NAME"]
