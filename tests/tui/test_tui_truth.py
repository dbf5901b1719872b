"""The screen never shows a doubtful number as live: a stopped publisher on a real ZeroMQ socket turns every
number stale, verdicts unknown and the mode line not live; header counts agree with the alarm list; alarm rows
give the live and the tripping value; verdicts say nothing while no discharge is on; a replay's end says ENDED."""

from __future__ import annotations

import json
import re
import socket
import time
from dataclasses import replace
from pathlib import Path

import pytest

from adapters.base import LinkState, SourceStatus
from monitor.alarms.events import AlarmState, Priority
from monitor.snapshot import ReplayPosition
from monitor.tui.app import RegimeApp
from monitor.tui.feed import EventTap, FixedFeed, SessionFeed
from monitor.tui.launch import settings_for
from monitor.tui.widgets.alarm_list import AlarmList
from monitor.tui.widgets.playback import PlaybackBar
from monitor.tui.widgets.readings import Readings
from monitor.tui.widgets.regime_map import RegimeMapView
from monitor.tui.widgets.sources import SourcesPanel
from monitor.tui.widgets.status_strip import StatusStrip
from monitor.tui.widgets.verdicts import Verdicts

from tui_helpers import alarm, built_snapshot, text_of, wait_for

zmq = pytest.importorskip("zmq")


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


@pytest.fixture
def quick_stale_config(tmp_path: Path):
    """The demo envelope with a 0.5 s stale time, so the test waits a second, not four."""
    from monitor.commands.demo import envelope_path
    from monitor.config import load_config
    text = Path(envelope_path()).read_text().replace('stale_after = "2s"', 'stale_after = "0.5s"')
    path = tmp_path / "envelope.toml"
    path.write_text(text)
    return load_config(path)


async def test_stopped_publisher_turns_every_number_stale(quick_stale_config) -> None:
    from adapters.zmq_stream import ZmqSource
    from monitor.session import Session, make_engine
    config = quick_stale_config
    endpoint = f"tcp://127.0.0.1:{_free_port()}"
    ctx = zmq.Context()
    pub = ctx.socket(zmq.PUB)
    pub.bind(endpoint)
    tap = EventTap()
    session = Session(ZmqSource(endpoint, name="probe"), config, sinks=[tap], engine=make_engine(config), live=True)
    app = RegimeApp(SessionFeed(session, tap), settings_for(config, bell=False))
    try:
        async with app.run_test(size=(120, 40)) as pilot:
            w = app.watch_screen
            readings, verdicts = w.query_one(Readings), w.query_one(Verdicts)
            strip, playback, sources = w.query_one(StatusStrip), w.query_one(PlaybackBar), w.query_one(SourcesPanel)
            the_map = w.query_one(RegimeMapView)
            deadline = time.monotonic() + 15
            while "✓" not in text_of(verdicts):           # the publisher talks until the screen shows verdicts
                assert time.monotonic() < deadline
                pub.send(json.dumps({"t": time.time(), "ne": 5e16, "Te": 3.0, "B": 0.01, "p0": 2.0}).encode())
                await pilot.pause(0.02)
            assert "LIVE" in text_of(playback) and "stale" not in text_of(readings)
            stopped = time.monotonic()                      # the publisher stops; its socket stays open
            await wait_for(pilot, lambda: "stale" in text_of(readings) and "unknown" in text_of(verdicts), timeout=10)
            # within twice the stale time (plus one frame of the numbers' redraw)
            assert time.monotonic() - stopped < 2 * config.stale_after + 1.0
            await wait_for(pilot, lambda: "data STALE" in text_of(strip) and "NOT LIVE" in text_of(playback))
            assert "✓" not in text_of(verdicts) and "✗" not in text_of(verdicts)
            assert "● LIVE" not in text_of(playback)
            assert "discharge unknown" in text_of(strip) and "probe" in text_of(strip)
            panel = text_of(sources)
            assert "STALE" in panel and "connected" not in panel       # one state at a time
            assert not re.search(r"[−-]\d", panel + text_of(readings) + text_of(w.query_one(AlarmList)))  # no negative age
            map_text = "\n".join("".join(s.text for s in strip_) for strip_ in the_map._strips)
            assert "STALE" in map_text and "◇" in map_text
    finally:
        app.stop.set()
        session.close()
        pub.close(linger=0)
        ctx.term()


async def test_header_counts_say_what_they_count_and_agree_with_the_list(fixed_settings) -> None:
    alarms = (alarm("a1"), alarm("a2", AlarmState.RETURNED_UNACKNOWLEDGED),
              alarm("b1", AlarmState.ACKNOWLEDGED, latched=True), alarm("c1", AlarmState.SHELVED, shelved_until=40.0),
              alarm("d1", AlarmState.SUPPRESSED), alarm("d2", AlarmState.SUPPRESSED), alarm("n1", AlarmState.NORMAL))
    app = RegimeApp(FixedFeed(built_snapshot(alarms=alarms)), fixed_settings)
    async with app.run_test(size=(160, 50)) as pilot:
        w = app.watch_screen
        await wait_for(pilot, lambda: bool(w.query_one(AlarmList).rows()))
        header = text_of(w.query_one(StatusStrip))
        rows = w.query_one(AlarmList).rows()
        listed = text_of(w.query_one(AlarmList))
        unacked = sum(a.state in (AlarmState.UNACKNOWLEDGED, AlarmState.RETURNED_UNACKNOWLEDGED) for a in rows)
        assert f"{unacked} to acknowledge" in header and unacked == 2
        assert f"{sum(a.state == AlarmState.ACKNOWLEDGED for a in rows)} acknowledged" in header
        assert f"{sum(a.state == AlarmState.SHELVED for a in rows)} shelved" in header
        assert "1 latched" in header
        assert "2 suppressed by design" in header and "2 suppressed by design" in listed
        assert len(rows) == 4                                   # suppressed and normal ones are not rows
        assert "alarm(s)" not in header


async def test_alarm_rows_show_live_and_tripping_values_and_one_prediction(fixed_settings) -> None:
    alarms = (alarm("ne_high", value=2.6e17),
              alarm("ne_high:predict", AlarmState.UNACKNOWLEDGED, Priority.ADVISORY, kind="predictive",
                    value=2.4e17, predicted_time=33.0, description="ne_high expected within 5 s"))
    app = RegimeApp(FixedFeed(built_snapshot(alarms=alarms)), fixed_settings)
    async with app.run_test(size=(160, 50)) as pilot:
        w = app.watch_screen
        await wait_for(pilot, lambda: len(w.query_one(AlarmList).rows()) == 2)
        lines = text_of(w.query_one(AlarmList)).splitlines()
        limit_row = next(line for line in lines if "ne_high " in line and "⇢" not in line)
        predict_row = next(line for line in lines if "⇢" in line)
        live = built_snapshot().latest["ne"][0] * 1e-6
        assert f"now {live:.2e}".replace("e+", "e") in limit_row        # the live value, cm^-3
        assert "at change 2.60e11" in limit_row                         # the value at the last transition, labelled
        assert "limit 2.50e11" in limit_row
        # the prediction said once: what (the limit's value) and when (3 s from data time 30 s)
        assert predict_row.count("limit") == 0 and "reaches 2.50e11 in 3.0 s" in predict_row
        assert "expected within" not in predict_row


async def test_verdicts_say_nothing_while_no_discharge_is_on(fixed_settings) -> None:
    snap = replace(built_snapshot(), discharge_on=False)
    app = RegimeApp(FixedFeed(snap), fixed_settings)
    async with app.run_test(size=(80, 24)) as pilot:
        verdicts = app.watch_screen.query_one(Verdicts)
        await wait_for(pilot, lambda: "not judged" in text_of(verdicts))
        text = text_of(verdicts)
        assert "✓" not in text and "✗" not in text
        assert "discharge off: no plasma to judge" in text and "…" not in text


async def test_replay_end_says_ended(fixed_settings) -> None:
    snap = built_snapshot(replay=True)
    snap = replace(snap, replay=ReplayPosition(time=60.0, start=0.0, end=60.0, speed=1.0, paused=False),
                   sources={"sim:steady": SourceStatus("sim:steady", LinkState.ENDED)})
    app = RegimeApp(FixedFeed(snap), fixed_settings)
    async with app.run_test(size=(120, 30)) as pilot:
        bar = app.watch_screen.query_one(PlaybackBar)
        await wait_for(pilot, lambda: "ENDED" in text_of(bar))
        assert "playing" not in text_of(bar) and "60.0 / 60.0 s" in text_of(bar)


def _words(text: str) -> set[str]:
    """Words, leaving out trend lines (their bins follow the width) and the flashing phase."""
    return {w.strip("…") for w in text.split() if w.strip("▁▂▃▄▅▆▇█")}


async def test_nothing_is_clipped_mid_word_at_80x24(fixed_settings) -> None:
    """Every word the 80x24 screen shows is a whole word of the same panel drawn 200 wide."""
    alarms = (alarm(), alarm("over_cutoff", AlarmState.RETURNED_UNACKNOWLEDGED, quantity="cutoff_ratio", value=0.9,
                             limit=1.0, latched=True),
              alarm("ne_high:predict", AlarmState.ACKNOWLEDGED, Priority.ADVISORY, kind="predictive", predicted_time=33.0))
    panels = (StatusStrip, Readings, Verdicts, AlarmList, SourcesPanel, PlaybackBar)
    seen: dict[type, str] = {}
    for size in ((200, 60), (80, 24)):
        app = RegimeApp(FixedFeed(built_snapshot(alarms=alarms, stale=False)), fixed_settings)
        async with app.run_test(size=size) as pilot:
            w = app.watch_screen
            await wait_for(pilot, lambda: bool(w.query_one(AlarmList).rows()))
            for panel in panels:
                text = text_of(w.query_one(panel))
                if size == (200, 60):
                    seen[panel] = text
                    continue
                for line in text.splitlines():
                    assert len(line.rstrip()) <= w.query_one(panel).size.width
                missing = _words(text) - _words(seen[panel])
                assert not missing, f"{panel.__name__} cut words at 80x24: {sorted(missing)}"


async def test_derived_table_keeps_its_units_at_80x24(fixed_settings) -> None:
    from monitor.tui.widgets.derived import DerivedTable
    app = RegimeApp(FixedFeed(built_snapshot()), fixed_settings)
    async with app.run_test(size=(80, 24)) as pilot:
        await pilot.press("d")
        table = app.watch_screen.query_one(DerivedTable)
        await wait_for(pilot, lambda: table.display and "λD" in text_of(table))
        text = text_of(table)
        assert "…" not in text
        assert re.search(r"λD\s+29\.0 .*µm", text) and re.search(r"n0\s+4\.80e14 .*cm⁻³", text)


async def test_clock_and_alarm_ages_stay_after_a_seek(fixed_settings) -> None:
    """Just after a seek (no reading at the target yet) the header shows the replay position and alarm
    ages are counted from it, never a blank clock or a dash."""
    snap = replace(built_snapshot(alarms=(alarm(since=20.0),), replay=True), data_time=None)
    app = RegimeApp(FixedFeed(snap), fixed_settings)
    async with app.run_test(size=(160, 50)) as pilot:
        w = app.watch_screen
        await wait_for(pilot, lambda: bool(w.query_one(AlarmList).rows()))
        assert "22.50 s" in text_of(w.query_one(StatusStrip))         # the replay position (22.5 s)
        assert "2.5 s" in text_of(w.query_one(AlarmList))             # 22.5 - 20.0
