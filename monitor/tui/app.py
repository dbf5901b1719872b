"""The Textual app: wires the watch, journal and help screens to a feed; a worker runs the pipeline, a timer renders."""

from __future__ import annotations

import threading
from typing import Any, Iterable

from textual.app import App, SystemCommand
from textual.binding import Binding
from textual.screen import Screen

from monitor.tui.feed import Feed
from monitor.tui.screens.confirm_quit import ConfirmQuit
from monitor.tui.screens.help import HelpScreen
from monitor.tui.screens.journal import JournalScreen
from monitor.tui.screens.shelve import ShelveDialog
from monitor.tui.screens.watch import WatchScreen
from monitor.tui.settings import ScreenSettings
from monitor.tui.widgets.alarm_list import AlarmList

__all__ = ["RegimeApp"]


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
        self.watch = WatchScreen(feed, self.settings)

    def on_mount(self) -> None:
        self.install_screen(JournalScreen(self.feed.tap), "journal")
        self.push_screen(self.watch)
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
        self.watch.show(snapshot, now)
        top = self.screen
        if top is not self.watch and hasattr(top, "show"):
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
        recording = self.watch.last.recording if self.watch.last is not None else None
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
        return [("watch", list(WatchScreen.BINDINGS)), ("alarm list", list(AlarmList.BINDINGS)),
                ("anywhere", list(self.BINDINGS) + [palette]), ("journal", list(JournalScreen.BINDINGS)),
                ("shelve dialog", list(ShelveDialog.BINDINGS[:1]) + [Binding("1-5", "pick", "pick a duration")])]

    def get_system_commands(self, screen: Screen) -> Iterable[SystemCommand]:
        yield from super().get_system_commands(screen)
        for b in WatchScreen.BINDINGS:
            yield SystemCommand(b.description.capitalize(), f"key {b.key_display or b.key}",
                                lambda a=b.action: self.watch.run_action(a))
