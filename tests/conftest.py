"""Shared test settings: Hypothesis profiles that suit a shared, noisy machine."""

from __future__ import annotations

import os

from hypothesis import HealthCheck, settings

# No per-example deadline: the machines are shared and timing is not what
# these properties check. CI runs the same examples every time (derandomize).
settings.register_profile("dev", deadline=None, suppress_health_check=[HealthCheck.too_slow])
settings.register_profile("ci", deadline=None, derandomize=True, suppress_health_check=[HealthCheck.too_slow])
settings.load_profile("ci" if os.environ.get("CI") else "dev")
