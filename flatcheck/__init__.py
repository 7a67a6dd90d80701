"""flatcheck: flatness of surface plates, guideways and air-bearing pads."""

__version__ = "0.1.0"
