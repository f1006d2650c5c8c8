"""Reading and writing photometry tables (CSV/TSV, ECSV, FITS, VOTable).

See :func:`open_photometry` for the two shapes read (a long table with a
star-id column, a folder of one-star files), :class:`ColumnMapping` for
choosing columns, and :func:`write_stars` for writing a long table.
"""

from .columns import ACCEPTED_NAMES, ColumnMapping, resolve_columns, time_scale_of_name
from .readers import (
    FORMATS,
    PhotometrySource,
    ReadReport,
    detect_format,
    open_photometry,
    raw_preview,
)
from .writers import write_stars

__all__ = [
    "ACCEPTED_NAMES",
    "FORMATS",
    "ColumnMapping",
    "PhotometrySource",
    "ReadReport",
    "detect_format",
    "open_photometry",
    "raw_preview",
    "resolve_columns",
    "time_scale_of_name",
    "write_stars",
]
