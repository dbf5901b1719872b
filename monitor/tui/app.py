"""The Textual app: wires the watch, journal and help screens to a feed; a worker runs the pipeline, a timer renders."""

from __future__ import annotations

import threading
from typing import Any, Callable, Iterable, Protocol, Sequence, runtime_checkable

from textual.app import App, SystemCommand
from textual.binding import Binding, BindingType
from textual.screen import Screen

from monitor.snapshot import Snapshot
from monitor.tui.feed import Feed
from monitor.tui.screens.confirm_quit import ConfirmQuit
from monitor.tui.screens.help import HelpScreen
from monitor.tui.screens.journal import JournalScreen
from monitor.tui.screens.shelve import ShelveDialog
from monitor.tui.screens.watch import WatchScreen
from monitor.tui.settings import ScreenSettings
from monitor.tui.widgets.alarm_list import AlarmList

__all__ = ["RegimeApp", "bindings_of", "PALETTE"]

PALETTE: tuple[tuple[str, str, str], ...] = (
    ("Acknowledge the selected alarm", "a", "acknowledge"),
    ("Acknowledge every alarm waiting for it", "A", "acknowledge_all"),
    ("Shelve the selected alarm for a chosen time", "z", "shelve"),
    ("Unshelve the selected alarm", "Z", "unshelve"),
    ("Reset the selected latched alarm", "r", "reset"),
    ("Switch units: practical (cm⁻³, eV) / SI (m⁻³, K)", "u", "units"),
    ("Alarm journal: every transition and operator action", "j", "journal"),
    ("Replay: pause or run", "space", "pause"),
    ("Replay: step forward while paused", ".", "step"),
    ("Replay: seek back 5 s", "[", "seek(-1)"),
    ("Replay: seek forward 5 s", "]", "seek(1)"),
    ("Replay: slower", "-", "speed(-1)"),
    ("Replay: faster (up to max)", "+", "speed(1)"),
    ("Derived table / map (narrow terminals)", "d", "derived"),
    ("Bell on or off", "b", "bell"),
)
"""The command palette's entries: (title, key, watch-screen action). Help and quit are added by the app."""


@runtime_checkable
class _Shows(Protocol):
    def show(self, snapshot: Snapshot | None, now: float) -> None: ...


def bindings_of(items: Sequence[BindingType]) -> list[Binding]:
    """The ``Binding`` objects of a BINDINGS list (tuples there are shorthand the screen does not use)."""
    return [b for b in items if isinstance(b, Binding)]


class RegimeApp(App[None]):
    """The operator's screen. ``ticks`` counts rendered snapshots (the benchmark reads it), ``bells`` the bells rung,
    ``said`` every message shown to the operator (newest last)."""

    CSS_PATH = "regime.tcss"
    TITLE = "regime"
    HORIZONTAL_BREAKPOINTS = [(0, "-narrow"), (150, "-wide")]   # 56 + 50 columns leave the map >= 40
    VERTICAL_BREAKPOINTS = [(0, "-short"), (36, "-tall")]
    BINDINGS = [
        Binding("q", "request_quit", "quit"),
        Binding("question_mark,f1", "help", "help", key_display="?"),
    ]

    def __init__(self, feed: Feed, settings: ScreenSettings | None = None, *, run_pipeline: bool = True) -> None:
        super().__init__()
        self.feed = feed
        self.settings = settings or ScreenSettings()
        self.stop = threading.Event()
        self.ticks = 0
        self.bells = 0
        self.said: list[str] = []
        self._run_pipeline = run_pipeline
        self.watch_screen = WatchScreen(feed, self.settings)

    def on_mount(self) -> None:
        self.install_screen(JournalScreen(self.feed.tap), "journal")
        self.push_screen(self.watch_screen)
        if self._run_pipeline:
            self.run_worker(lambda: self.feed.run(self.stop), thread=True, name="pipeline", exit_on_error=False)
        self.set_interval(1.0 / max(1.0, min(20.0, self.settings.refresh_hz)), self.render_tick)
        self.render_tick()
        if self.settings.quit_after is not None:
            self.set_timer(max(0.0, self.settings.quit_after), lambda: self._quit(True))

    def on_unmount(self) -> None:
        self.stop.set()

    def render_tick(self) -> None:
        """Render the latest snapshot (never more often than the bounded refresh rate).

        A tick that fires while the app is shutting down (the screen stack already
        emptied) does nothing: there is nothing left to draw on.
        """
        if not self.screen_stack:
            return
        snapshot = self.feed.snapshot()
        now = self.settings.clock()
        self.watch_screen.show(snapshot, now)
        top = self.screen
        if top is not self.watch_screen and isinstance(top, _Shows):
            top.show(snapshot, now)
        self.ticks += 1

    def bell(self) -> None:
        self.bells += 1
        super().bell()

    def notify(self, message: str, *args: Any, **kwargs: Any) -> None:
        """Show a message to the operator, and keep it in ``said``."""
        self.said.append(str(message))
        super().notify(message, *args, **kwargs)

    def action_request_quit(self) -> None:
        last = self.watch_screen.last
        recording = last.recording if last is not None else None
        if not recording:
            self._quit(True)
        elif not isinstance(self.screen, ConfirmQuit):
            self.push_screen(ConfirmQuit(recording), self._quit)

    def _quit(self, confirmed: bool | None) -> None:
        if confirmed:
            self.stop.set()
            self.exit()

    def action_help(self) -> None:
        if not isinstance(self.screen, HelpScreen):
            self.push_screen(HelpScreen(self.key_groups()))

    def key_groups(self) -> list[tuple[str, list[Binding]]]:
        palette = Binding("ctrl+p", "command_palette", "list every action by name (command palette)")
        return [("watch", bindings_of(WatchScreen.BINDINGS)), ("alarm list", bindings_of(AlarmList.BINDINGS)),
                ("anywhere", bindings_of(self.BINDINGS) + [palette]), ("journal", bindings_of(JournalScreen.BINDINGS)),
                ("shelve dialog", bindings_of(ShelveDialog.BINDINGS)[:1] + [Binding("1-5", "pick", "pick a duration")])]

    def _on_watch(self, action: str) -> Callable[[], None]:
        def run() -> None:
            if self.screen is not self.watch_screen:
                self.pop_screen()
            self.call_next(self.watch_screen.run_action, action)
        return run

    def get_system_commands(self, screen: Screen[Any]) -> Iterable[SystemCommand]:
        """The tool's own actions only; the framework's defaults (quit at once, theme, screenshot, keys
        panel) are left out: quitting here asks first while recording, and the keys are on the help page."""
        for title, key, action in PALETTE:
            yield SystemCommand(title, f"key {key}", self._on_watch(action))
        yield SystemCommand("Help: every key, the map and the marks explained", "key ?", self.action_help)
        yield SystemCommand("Quit (asks first while recording)", "key q", self.action_request_quit)
