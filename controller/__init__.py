"""precess: a controller for low-field and Earth's-field NMR instruments."""

__version__ = "0.1.0"
