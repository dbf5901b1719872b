"""End to end: the simulated demo discharge raises its alarm on the screen, the bell rings, the operator acknowledges it."""

from __future__ import annotations

from monitor.alarms.events import AlarmState
from monitor.tui.app import RegimeApp
from monitor.tui.launch import settings_for
from monitor.tui.widgets.alarm_list import UNACKED, AlarmList
from monitor.tui.widgets.status_strip import StatusStrip

from tui_helpers import SessionFeed, demo_session, state_of, text_of, wait_for


async def test_demo_excursion_raises_and_operator_acknowledges() -> None:
    # the 60 s demo scenario at twice real speed, in the app's worker thread: the excursion raises
    # ne_high about 13 s in; it waits for acknowledgement until the shutdown (about 26 s in)
    session, tap = demo_session("sim:demo?seed=5&speed=2&loop=0")
    app = RegimeApp(SessionFeed(session, tap), settings_for(session.config, bell=True))
    try:
        async with app.run_test(size=(100, 30)) as pilot:
            alarms = app.watch_screen.query_one(AlarmList)
            await wait_for(pilot, lambda: state_of(session, "ne_high") in UNACKED)
            await wait_for(pilot, lambda: "ne_high" in [a.alarm for a in alarms.rows()])
            await wait_for(pilot, lambda: app.bells >= 1)          # a new high-priority alarm rang the bell
            assert "ne_high" in text_of(alarms)
            await wait_for(pilot, lambda: "to acknowledge" in text_of(app.watch_screen.query_one(StatusStrip)))
            # a row is selected and unacknowledged ones are listed first
            chosen = alarms.selected
            assert chosen is not None and state_of(session, chosen) in UNACKED
            await pilot.press("a")      # one key press: the pilot waits up to 2 s for the busy process
            await wait_for(pilot, lambda: any(e.alarm == chosen and e.action == "acknowledge"
                                              for e in tap.events()))
            ack = next(e for e in tap.events() if e.alarm == chosen and e.action == "acknowledge")
            assert ack.previous in UNACKED and ack.state in (AlarmState.ACKNOWLEDGED, AlarmState.NORMAL)
            await wait_for(pilot, lambda: chosen not in [a.alarm for a in alarms.rows() if a.state in UNACKED])
            summary = session.summary()                 # nothing lost or refused while the screen ran
            assert summary["accepted"] > 20_000 and summary["lost"] == 0 and summary["rejected_total"] == 0
    finally:
        session.close()


async def test_bell_can_be_turned_off() -> None:
    session, tap = demo_session("sim:demo?seed=6&speed=3&loop=0")
    app = RegimeApp(SessionFeed(session, tap), settings_for(session.config, bell=True))
    try:
        async with app.run_test(size=(100, 30)) as pilot:
            await pilot.press("b")
            await wait_for(pilot, lambda: not app.watch_screen.bell)
            await wait_for(pilot, lambda: state_of(session, "ne_high") in UNACKED)
            await wait_for(pilot, lambda: "ne_high" in [a.alarm for a in app.watch_screen.query_one(AlarmList).rows()])
            assert app.bells == 0
            assert "bell off" in text_of(app.watch_screen.query_one(StatusStrip))
    finally:
        session.close()
