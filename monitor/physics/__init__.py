"""Plasma physics: pure vectorised functions, SI in and SI out, temperatures in eV."""

from monitor.physics.derive import INPUT_KEYS, REQUIRES, WARNINGS, Derived, derive

__all__ = ["Derived", "derive", "INPUT_KEYS", "REQUIRES", "WARNINGS"]
