"""Open the screen on a Session: build the feed and settings from the config, run the app, close the session."""

from __future__ import annotations

import time
from typing import Any, Callable

from monitor.tui.feed import EventTap, SessionFeed
from monitor.tui.settings import ScreenSettings, envelope_box

__all__ = ["settings_for", "make_app"]


def settings_for(config: Any, *, title: str = "regime", bell: bool | None = None, units: str = "practical",
                 clock: Callable[[], float] = time.time, quit_after: float | None = None) -> ScreenSettings:
    """Screen settings from a monitor.config.Config (device guides, envelope box, bell, staleness)."""
    device = config.device
    alarm_bell = getattr(config.alarms, "bell", True) if config.alarms is not None else True
    return ScreenSettings(title=title, length=device.length, wave_frequency=device.wave_frequency,
                          box=envelope_box(config.limits), units=units,
                          bell=alarm_bell if bell is None else bell, stale_after=config.stale_after, clock=clock,
                          quit_after=quit_after)


def make_app(session: Any, tap: EventTap, settings: ScreenSettings) -> Any:
    """The RegimeApp on ``session`` (whose sinks must include ``tap``)."""
    from monitor.tui.app import RegimeApp
    return RegimeApp(SessionFeed(session, tap), settings)
