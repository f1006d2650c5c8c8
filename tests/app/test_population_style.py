"""Every class of the registry has its own style in the population view."""

from phasewise.app.population.style import _STYLES, class_style
from phasewise.core.classes import CLASSES


def test_every_registry_class_has_a_declared_style():
    # a class added to core.classes without a style would get a spare colour
    # that could repeat another class's
    missing = [code for code in CLASSES if code not in _STYLES]
    assert missing == []
    assert class_style("LONG").colour == _STYLES["LONG"].colour
