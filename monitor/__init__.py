"""regime: a live plasma-regime monitor (everything that is not instrument I/O)."""

__version__ = "0.1.0"
