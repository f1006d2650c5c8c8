"""Icons of our own design (SVG), shipped as resources of ``phasewise.icons``."""
