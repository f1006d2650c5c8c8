"""The vetting desk: the PySide6 + pyqtgraph window where stars are decided.

Importing this package imports Qt; the command line imports it only inside
the commands that open a window.  :class:`MainWindow` is the window; other
views dock into it with :meth:`MainWindow.add_view`.
"""

from .blas import single_threaded_blas
from .qt_guard import protect_singletons

protect_singletons()
single_threaded_blas()

from .main_window import MainWindow  # noqa: E402

__all__ = ["MainWindow"]
