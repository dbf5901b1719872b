"""A source that falls silent is shown STALE (word, glyph, colour, loud panel); a failed pipeline is shown, not raised."""

from __future__ import annotations

import os
import time

import pytest

from adapters.serial_line import SerialSource
from monitor.session import Session, make_engine
from monitor.tui.app import RegimeApp
from monitor.tui.feed import EventTap, SessionFeed
from monitor.tui.launch import settings_for
from monitor.tui.widgets.sources import SourcesPanel

from tui_helpers import demo_config, text_of, wait_for


class MovableClock:
    """Wall clock that tests can push forward (the session and the screen share it)."""

    def __init__(self) -> None:
        self.offset = 0.0

    def __call__(self) -> float:
        return time.time() + self.offset


@pytest.fixture
def pty_pair():
    master, slave = os.openpty()
    yield master, os.ttyname(slave)
    os.close(master)
    os.close(slave)


async def test_silent_serial_source_is_shown_stale(pty_pair) -> None:
    master, port = pty_pair
    clock = MovableClock()
    config = demo_config()
    tap = EventTap()
    session = Session(SerialSource(port, name="probe"), config, sinks=[tap], engine=make_engine(config),
                      live=True, wall=clock)
    app = RegimeApp(SessionFeed(session, tap), settings_for(config, bell=False, clock=clock))
    try:
        async with app.run_test(size=(100, 30)) as pilot:
            panel = app.watch_screen.query_one(SourcesPanel)

            def accepted() -> int:
                c = session.snapshot().counts
                return sum(x.accepted for x in c.values())

            deadline = time.monotonic() + 15
            while accepted() < 5:                     # a real pseudo-terminal carrying text lines
                assert time.monotonic() < deadline
                os.write(master, b"ne=5e16 Te=3.0\n")
                await pilot.pause(0.05)
            await wait_for(pilot, lambda: "connected" in text_of(panel) and "STALE" not in text_of(panel))
            assert not panel.has_class("-trouble")
            clock.offset += 10.0                       # ten seconds of silence
            await wait_for(pilot, lambda: "STALE" in text_of(panel))
            assert "◼" in text_of(panel)
            assert panel.has_class("-trouble")
            # the alarm engine raised its own stale alarm from the same silence
            await wait_for(pilot, lambda: any(v.kind == "stale" and v.state.value != "normal"
                                              for v in session.snapshot().alarms))
            os.write(master, b"ne=5e16 Te=3.0\n")      # readings come back
            clock.offset = 0.0
            await wait_for(pilot, lambda: "STALE" not in text_of(panel))
    finally:
        app.stop.set()
        session.close()


async def test_failed_source_is_a_visible_status(tmp_path) -> None:
    config = demo_config()
    tap = EventTap()
    missing = tmp_path / "no-such-port"
    session = Session(SerialSource(str(missing), name="gone"), config, sinks=[tap], live=True)
    app = RegimeApp(SessionFeed(session, tap), settings_for(config, bell=False))
    try:
        async with app.run_test(size=(100, 30)) as pilot:
            panel = app.watch_screen.query_one(SourcesPanel)
            await wait_for(pilot, lambda: any(w in text_of(panel) for w in ("FAILED", "DISCONNECTED", "STALE")))
            assert panel.has_class("-trouble")
    finally:
        session.close()
