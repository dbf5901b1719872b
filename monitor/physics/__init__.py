"""Plasma physics: pure vectorised functions, SI in and SI out, temperatures in eV."""

from monitor.physics.derive import Derived, derive

__all__ = ["Derived", "derive"]
