"""Arrays that are views of Qt memory are made from a named, living object.

``pyqtgraph.functions.ndarray_from_qpolygonf`` returns a numpy view of the
polygon's memory without keeping the polygon alive.  Called on a temporary
(``ndarray_from_qpolygonf(transform.map(poly))``) the view reads freed memory:
the desk's point painter did so, and a benchmark crashed (segmentation fault
in ``np.clip``) when a worker thread allocated at the same moment.  The crash
depends on timing, so the rule is checked in the source instead.
"""

from __future__ import annotations

import ast
from pathlib import Path

APP = Path(__file__).resolve().parents[2] / "app"
VIEW_MAKERS = {"ndarray_from_qpolygonf", "ndarray_from_qimage", "ndarray_to_qimage"}


def _calls():
    for path in sorted(APP.rglob("*.py")):
        tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
        for node in ast.walk(tree):
            if isinstance(node, ast.Call):
                func = node.func
                name = func.attr if isinstance(func, ast.Attribute) else getattr(func, "id", "")
                if name in VIEW_MAKERS:
                    yield path, node


def test_views_of_qt_memory_are_made_from_named_objects():
    calls = list(_calls())
    assert calls, "the desk's painters make such views; the check must see them"
    temporaries = [
        f"{path.relative_to(APP.parent)}:{node.lineno}"
        for path, node in calls
        if not all(isinstance(arg, ast.Name) for arg in node.args)
    ]
    assert temporaries == []
