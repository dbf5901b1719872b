"""Fixtures of the screen's tests; the plain helpers live in tui_helpers.py."""

from __future__ import annotations

import pytest

from monitor.tui.settings import ScreenSettings
from tui_helpers import FIXED_NOW


@pytest.fixture
def fixed_settings() -> ScreenSettings:
    return ScreenSettings(title="regime", length=0.3, wave_frequency=2.45e9,
                          box=(1.0e16, 2.5e17, 1.0, 8.0), clock=lambda: FIXED_NOW, refresh_hz=15.0)
