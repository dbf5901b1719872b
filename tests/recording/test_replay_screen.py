"""A replay on the real screen (App.run_test and the pilot): pause and seek reach the CsvSource through the session."""

from __future__ import annotations

import time

from monitor.recording.replaying import open_file
from monitor.session import Session, make_engine

from recording_helpers import ROOT


async def test_pause_and_seek_keys_drive_the_replay() -> None:
    from monitor.tui.app import RegimeApp
    from monitor.tui.feed import EventTap, SessionFeed

    opened = open_file(ROOT / "replay_data" / "argon_rf_excursion.csv", speed=1.0)
    session = Session(opened.source, opened.config, [], engine=make_engine(opened.config), live=False)
    tap = EventTap()
    session.add_sink(tap)
    app = RegimeApp(SessionFeed(session, tap))
    async with app.run_test(size=(140, 45)) as pilot:
        async def until(cond, timeout: float = 20.0) -> bool:
            deadline = time.monotonic() + timeout
            while time.monotonic() < deadline:
                if cond():
                    return True
                await pilot.pause(0.05)
            return cond()

        start = session.replay_position().start
        assert await until(lambda: session.replay_position().time > start)
        await pilot.press("space")
        assert await until(lambda: session.replay_position().paused)
        here = session.replay_position().time
        await pilot.press("right_square_bracket")
        assert await until(lambda: session.replay_position().time > here + 0.5)
        assert session.summary()["rejected"] == {}
        app.stop.set()
        await pilot.press("q")
    session.close()
