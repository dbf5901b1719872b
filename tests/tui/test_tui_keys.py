"""Every operator key on the real app driven by the pilot, against a real Session and alarm engine."""

from __future__ import annotations

import numpy as np
import pytest

from adapters.csv_file import CsvSource
from monitor.alarms.events import AlarmState
from monitor.session import Session, make_engine
from monitor.tui.app import RegimeApp
from monitor.tui.launch import settings_for
from monitor.tui.screens.help import HelpScreen
from monitor.tui.screens.journal import JournalScreen
from monitor.tui.screens.shelve import ShelveDialog
from monitor.tui.app import PALETTE, bindings_of
from monitor.tui.screens.watch import WatchScreen
from monitor.tui.widgets.alarm_list import UNACKED, AlarmList
from monitor.tui.widgets.playback import PlaybackBar
from monitor.tui.widgets.readings import Readings

from tui_helpers import EventTap, SessionFeed, demo_config, demo_session, state_of, step_until, text_of, wait_for

SIZE = (100, 30)
LOADED = 90.0       # s: a deadline for a busy machine; the wait ends as soon as its condition holds


def _plain(renderable) -> str:
    import io
    from rich.console import Console
    console = Console(width=200, file=io.StringIO(), record=True, color_system=None)
    console.print(renderable)
    return console.export_text()


def _app(session, tap, *, run_pipeline: bool = False) -> RegimeApp:
    return RegimeApp(SessionFeed(session, tap), settings_for(session.config, bell=False), run_pipeline=run_pipeline)


async def _select(pilot, app: RegimeApp, alarm: str) -> None:
    alarms = app.watch_screen.query_one(AlarmList)
    await wait_for(pilot, lambda: alarm in [a.alarm for a in alarms.rows()])
    await pilot.press("home")
    for _ in range(len(alarms.rows())):
        if alarms.selected == alarm:
            return
        await pilot.press("down")
    assert alarms.selected == alarm


@pytest.fixture
def raised():
    """The demo excursion has raised ne_high (unacknowledged)."""
    session, tap = demo_session()
    step_until(session, lambda: state_of(session, "ne_high") in UNACKED)
    yield session, tap
    session.close()


async def test_acknowledge_selected(raised) -> None:
    session, tap = raised
    app = _app(session, tap)
    async with app.run_test(size=SIZE) as pilot:
        await _select(pilot, app, "ne_high")
        await pilot.press("a")
        await wait_for(pilot, lambda: state_of(session, "ne_high") in (AlarmState.ACKNOWLEDGED, AlarmState.NORMAL))
        await wait_for(pilot, lambda: "acknowledged" in text_of(app.watch_screen.query_one(AlarmList)))
        assert any(e.action == "acknowledge" and e.alarm == "ne_high" for e in tap.events())


async def test_acknowledge_all(raised) -> None:
    session, tap = raised
    app = _app(session, tap)
    async with app.run_test(size=SIZE) as pilot:
        await pilot.pause()
        assert any(v.state in UNACKED for v in session.snapshot().alarms)
        await pilot.press("A")
        await wait_for(pilot, lambda: not any(v.state in UNACKED for v in session.snapshot().alarms))
        # the strip redraws on the next render tick: wait for it rather than assume it has happened
        await wait_for(pilot, lambda: "to acknowledge" not in text_of(app.watch_screen.query_one("#strip")))


async def test_shelve_then_unshelve(raised) -> None:
    session, tap = raised
    app = _app(session, tap)
    async with app.run_test(size=SIZE) as pilot:
        await _select(pilot, app, "ne_high")
        await pilot.press("z")
        await wait_for(pilot, lambda: isinstance(app.screen, ShelveDialog))
        await pilot.press("1")                       # 10 minutes
        await wait_for(pilot, lambda: state_of(session, "ne_high") == AlarmState.SHELVED)
        view = next(v for v in session.snapshot().alarms if v.alarm == "ne_high")
        assert view.shelved_until is not None and view.shelved_until - session.now() == pytest.approx(600.0, abs=5.0)
        await wait_for(pilot, lambda: "shelved" in text_of(app.watch_screen.query_one(AlarmList)))
        await _select(pilot, app, "ne_high")
        await pilot.press("Z")
        await wait_for(pilot, lambda: state_of(session, "ne_high") not in (AlarmState.SHELVED, None))


async def test_shelve_cancelled_changes_nothing(raised) -> None:
    session, tap = raised
    app = _app(session, tap)
    async with app.run_test(size=SIZE) as pilot:
        await _select(pilot, app, "ne_high")
        await pilot.press("z")
        await wait_for(pilot, lambda: isinstance(app.screen, ShelveDialog))
        await pilot.press("escape")
        await wait_for(pilot, lambda: isinstance(app.screen, WatchScreen))
        assert state_of(session, "ne_high") in UNACKED


async def test_reset_latched_after_return_and_acknowledge() -> None:
    session, tap = demo_session()
    try:
        step_until(session, lambda: state_of(session, "over_cutoff") in UNACKED)
        # the recovery brings the density back under the cutoff; the latched alarm stays
        step_until(session, lambda: session.latest().get("cutoff_ratio", (9.0, None))[0] < 0.8)
        assert state_of(session, "over_cutoff") != AlarmState.NORMAL
        app = _app(session, tap)
        async with app.run_test(size=SIZE) as pilot:
            await _select(pilot, app, "over_cutoff")
            await pilot.press("a")
            await wait_for(pilot, lambda: state_of(session, "over_cutoff") == AlarmState.ACKNOWLEDGED)
            await pilot.press("r")
            await wait_for(pilot, lambda: state_of(session, "over_cutoff") == AlarmState.NORMAL)
            assert any(e.action == "reset" and e.alarm == "over_cutoff" for e in tap.events())
    finally:
        session.close()


@pytest.fixture
def replay(tmp_path):
    """A 60 s plain CSV shot replayed at real speed through a real Session in the app's worker."""
    t = np.arange(0.0, 60.0, 0.01)
    rows = "\n".join(f"{x:.2f},5.0e16,3.0" for x in t)
    path = tmp_path / "shot.csv"
    path.write_text("t,ne,Te\n" + rows + "\n")
    config = demo_config()
    tap = EventTap()
    session = Session(CsvSource(path, speed=1.0), config, sinks=[tap], engine=make_engine(config), live=False)
    yield session, tap
    session.close()


async def test_pause_step_seek_speed(replay) -> None:
    session, tap = replay
    app = _app(session, tap, run_pipeline=True)
    async with app.run_test(size=SIZE) as pilot:
        pos = lambda: session.replay_position()  # noqa: E731
        await wait_for(pilot, lambda: pos() is not None and pos().time > 0.2)
        await pilot.press("space")
        await wait_for(pilot, lambda: pos().paused)
        await wait_for(pilot, lambda: "PAUSED" in text_of(app.watch_screen.query_one(PlaybackBar)))
        here = pos().time
        await pilot.press("full_stop")
        await wait_for(pilot, lambda: pos().time > here)
        assert pos().paused
        here = pos().time
        await pilot.press("right_square_bracket")
        await wait_for(pilot, lambda: pos().time >= here + 4.9)
        here = pos().time
        await pilot.press("left_square_bracket")
        await wait_for(pilot, lambda: pos().time <= here - 4.9)
        # generous deadlines (the pilot can be slow under load); each step waits on the actual state
        await pilot.press("plus")
        await wait_for(pilot, lambda: pos().speed == 2.0, timeout=LOADED)
        await wait_for(pilot, lambda: "×2" in text_of(app.watch_screen.query_one(PlaybackBar)), timeout=LOADED)
        await pilot.press("minus")
        await wait_for(pilot, lambda: pos().speed == 1.0, timeout=LOADED)
        await pilot.press("space")
        await wait_for(pilot, lambda: not pos().paused)


async def test_replay_keys_on_a_live_source_say_so(raised) -> None:
    session, tap = raised
    app = _app(session, tap)
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("space")
        await wait_for(pilot, lambda: any("live source" in m for m in app.said))
        assert "LIVE" in text_of(app.watch_screen.query_one(PlaybackBar))


async def test_unit_switch(raised) -> None:
    session, tap = raised
    app = _app(session, tap)
    async with app.run_test(size=SIZE) as pilot:
        readings = app.watch_screen.query_one(Readings)
        await wait_for(pilot, lambda: "cm⁻³" in text_of(readings))
        await pilot.press("u")
        await wait_for(pilot, lambda: "m⁻³" in text_of(readings) and "cm⁻³" not in text_of(readings))
        assert " K" in text_of(readings)          # Te in kelvin in SI
        await pilot.press("u")
        await wait_for(pilot, lambda: "cm⁻³" in text_of(readings) and " eV" in text_of(readings))


async def test_help_lists_every_key(raised) -> None:
    session, tap = raised
    app = _app(session, tap)
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("question_mark")
        await wait_for(pilot, lambda: isinstance(app.screen, HelpScreen))
        shown = _plain(app.screen.table)
        for b in WatchScreen.BINDINGS + AlarmList.BINDINGS + RegimeApp.BINDINGS:
            assert b.description in shown, b.description
        await pilot.press("escape")
        await wait_for(pilot, lambda: isinstance(app.screen, WatchScreen))


async def test_journal_screen_lists_events(raised) -> None:
    session, tap = raised
    app = _app(session, tap)
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("j")
        await wait_for(pilot, lambda: isinstance(app.screen, JournalScreen) and bool(app.screen.query("#journal")))
        log = app.screen.query_one("#journal")
        await wait_for(pilot, lambda: any("ne_high" in line.text for line in log.lines))
        await pilot.press("escape")
        await wait_for(pilot, lambda: isinstance(app.screen, WatchScreen))


async def test_quit_without_recording_exits(raised) -> None:
    session, tap = raised
    app = _app(session, tap)
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("q")
        await wait_for(pilot, lambda: app.return_code is not None)   # set by App.exit()
    assert app.return_code == 0
    assert app.stop.is_set()


async def test_quit_while_recording_asks_first(tmp_path) -> None:
    from monitor.recording.recorder import Recorder
    from monitor.tui.screens.confirm_quit import ConfirmQuit
    config = demo_config()
    session, tap = demo_session("sim:steady?seed=1&speed=max&duration=5", config=config)
    session.recorder = Recorder(tmp_path, config, source_name=session.name)     # the run's recorder
    session.add_sink(session.recorder)
    step_until(session, lambda: session.snapshot().recording is not None)
    app = _app(session, tap)
    try:
        async with app.run_test(size=SIZE) as pilot:
            await pilot.press("q")
            await wait_for(pilot, lambda: isinstance(app.screen, ConfirmQuit))
            await pilot.press("n")
            await wait_for(pilot, lambda: isinstance(app.screen, WatchScreen))
            assert app.return_code is None                      # not exited
            await pilot.press("q")
            await wait_for(pilot, lambda: isinstance(app.screen, ConfirmQuit))
            await pilot.press("y")
            await wait_for(pilot, lambda: app.return_code is not None)
    finally:
        session.close()


async def test_command_palette_lists_the_actions(raised) -> None:
    from textual.command import CommandPalette
    session, tap = raised
    app = _app(session, tap)
    async with app.run_test(size=SIZE) as pilot:
        await wait_for(pilot, lambda: app.screen is app.watch_screen)
        commands = list(app.get_system_commands(app.watch_screen))
        titles = " | ".join(c.title for c in commands)
        # every key of the watch screen has its entry, and so do help and quit
        assert {action for _t, _k, action in PALETTE} == {b.action for b in bindings_of(WatchScreen.BINDINGS)}
        assert "Help" in titles and "Quit (asks first while recording)" in titles
        # none of the framework's defaults, whose "quit at once" contradicts the confirm-quit
        for default in ("Quit the application", "Theme", "Screenshot", "Keys", "Maximize"):
            assert default not in titles
        await pilot.press("ctrl+p")
        await wait_for(pilot, lambda: isinstance(app.screen, CommandPalette))
        await pilot.press(*"acknowledge every")
        await pilot.press("enter")
        await wait_for(pilot, lambda: not any(v.state in UNACKED for v in session.snapshot().alarms))


async def test_derived_table_swaps_with_the_map_on_narrow_terminals(raised) -> None:
    session, tap = raised
    app = _app(session, tap)
    async with app.run_test(size=(80, 24)) as pilot:
        await wait_for(pilot, lambda: app.screen is app.watch_screen)
        box, the_map = app.watch_screen.query_one("#derived-box"), app.watch_screen.query_one("#map")
        assert not box.display and the_map.display
        await pilot.press("d")
        await wait_for(pilot, lambda: box.display and not the_map.display)
        assert "λD" in text_of(app.watch_screen.query_one("#derived"))
        await pilot.press("d")
        await wait_for(pilot, lambda: not box.display and the_map.display)


async def test_a_render_tick_during_shutdown_draws_nothing_and_does_not_raise(raised) -> None:
    # A refresh timer can fire after the app has emptied its screen stack on the way out
    # (seen once in CI as ScreenStackError). Such a tick must be a no-op, not a crash.
    session, tap = raised
    app = _app(session, tap)
    async with app.run_test(size=SIZE) as pilot:
        await wait_for(pilot, lambda: app.ticks > 0)
    assert app.screen_stack == []
    ticks = app.ticks
    app.render_tick()
    assert app.ticks == ticks


async def test_shelve_dialog_shows_a_long_alarm_id_whole() -> None:
    # A predictive alarm's id is the limit's name plus ":predict"; it used to sit in a one-line
    # title wider than the dialog and was cut at the border. Every line must fit inside the box.
    from pathlib import Path

    from textual.app import App
    from textual.widgets import Label

    import monitor.tui.app as app_module

    long_id = "ne_high_in_the_afterglow_of_the_discharge:predict"

    class Host(App[None]):
        CSS_PATH = str(Path(app_module.__file__).with_name("regime.tcss"))

        def on_mount(self) -> None:
            self.push_screen(ShelveDialog(long_id))

    app = Host()
    async with app.run_test(size=(80, 24)) as pilot:
        await wait_for(pilot, lambda: isinstance(app.screen, ShelveDialog))
        await pilot.pause()
        dialog = app.screen.query_one("#dialog")
        labels = list(dialog.query(Label))
        assert any(long_id in str(w.render()) for w in labels)
        for w in labels:
            assert w.size.width <= dialog.content_size.width, str(w.render())
        shown = app.screen.query_one("#shelve-alarm")
        assert shown.size.width * shown.size.height >= len(long_id)   # wrapped, not cut


@pytest.mark.parametrize("size", [(80, 24), (100, 30), (120, 36), (149, 40), (150, 40), (200, 50)])
async def test_the_map_has_room_to_draw_at_every_common_terminal_width(raised, size) -> None:
    # At 120 columns the third (derived) column used to leave the map 12 cells: "map needs 20x6 cells".
    session, tap = raised
    app = _app(session, tap)
    async with app.run_test(size=size) as pilot:
        await wait_for(pilot, lambda: app.ticks > 0)
        await pilot.pause()
        the_map = app.watch_screen.query_one("#map")
        assert the_map.display
        assert the_map.content_region.width >= 30 and the_map.content_region.height >= 6
        assert "map needs" not in text_of(the_map)
