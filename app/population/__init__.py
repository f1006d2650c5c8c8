"""The population view: diagnostic diagrams of the whole field, linked to the star list."""

from .plot import DiagramPlot
from .view import CAUTION, PopulationView

__all__ = ["PopulationView", "DiagramPlot", "CAUTION"]
