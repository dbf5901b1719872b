"""Shared fixtures for the physics tests: a typical device and typical readings."""

from __future__ import annotations

import pytest

from monitor.model import Device


@pytest.fixture
def rf_device() -> Device:
    """A 30 cm argon RF discharge with a 2.45 GHz probing wave (our own example)."""
    return Device(length=0.3, wave_frequency=2.45e9)
