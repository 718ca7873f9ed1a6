"""The version of specbench (one place: the package, the frozen cells and the settings files read it)."""

__version__ = "0.1.0"
