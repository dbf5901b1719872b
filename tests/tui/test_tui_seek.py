"""The screen's forward seek key plays the skipped stretch through the alarm engine (real app, pilot, Session)."""

from __future__ import annotations

import numpy as np
import pytest

from adapters.csv_file import CsvSource
from monitor.session import Session, make_engine
from monitor.tui.app import RegimeApp
from monitor.tui.launch import settings_for
from monitor.tui.widgets.alarm_list import AlarmList

from tui_helpers import EventTap, SessionFeed, demo_config, state_of, wait_for

SIZE = (100, 30)
LOADED = 90.0       # s: a deadline for a busy machine; the wait ends as soon as its condition holds
T0 = 1767261600.0   # recorded shots carry epoch times


@pytest.fixture
def paused_shot(tmp_path):
    """60 s at 100 Hz, ne over the demo's ne_high (1.5e17 m^-3) from 2.0 s to 3.5 s; replayed at 1x, paused at its start."""
    t = T0 + np.arange(6000) * 0.01
    ne = np.where((t - T0 >= 2.0) & (t - T0 < 3.5), 3.0e17, 5.0e16)
    path = tmp_path / "shot.csv"
    path.write_text("t,ne,Te\n" + "".join(f"{x:.2f},{v:.6g},3.0\n" for x, v in zip(t, ne)))
    config = demo_config()
    tap = EventTap()
    session = Session(CsvSource(path, speed=1.0), config, sinks=[tap], engine=make_engine(config), live=False)
    assert session.pause()
    yield session, tap
    session.close()


async def test_seek_forward_key_journals_the_excursion_it_skips(paused_shot) -> None:
    session, tap = paused_shot
    app = RegimeApp(SessionFeed(session, tap), settings_for(session.config, bell=False), run_pipeline=True)
    async with app.run_test(size=SIZE) as pilot:
        pos = session.replay_position
        await wait_for(pilot, lambda: pos() is not None and pos().paused)
        await pilot.press("right_square_bracket")                      # forward 5 s, from 0 s
        await wait_for(pilot, lambda: pos().time >= T0 + 5.0)             # there at once
        await wait_for(pilot, lambda: not session.source.catching_up, timeout=LOADED)
        assert pos().paused and pos().time == T0 + 5.0                 # still paused, at 5 s
        raised = [e for e in tap.events() if e.alarm == "ne_high" and e.state.value == "unacknowledged"]
        # demo envelope: on_delay 0.3 s after 2.0 s; returns after off_delay 0.5 s past 3.5 s
        assert len(raised) == 1 and T0 + 2.3 - 0.011 <= raised[0].time <= T0 + 2.3 + 0.011
        assert state_of(session, "ne_high").value == "returned_unacknowledged"
        alarms = app.watch_screen.query_one(AlarmList)
        await wait_for(pilot, lambda: "ne_high" in [a.alarm for a in alarms.rows()], timeout=LOADED)
        app.stop.set()
