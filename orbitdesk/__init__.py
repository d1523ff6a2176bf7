"""OrbitDesk: a workbench for hand-built dynamical models."""

__version__ = "0.1.0"
