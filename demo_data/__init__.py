"""The demo survey (invented data; see README.md here), shipped as resources of ``phasewise.demo_data``."""
