"""Every key of the screen on one page, built from the bindings themselves so it cannot drift."""

from __future__ import annotations

from rich.table import Table
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import VerticalScroll
from textual.screen import ModalScreen
from textual.widgets import Static

from monitor.tui import palette

__all__ = ["HelpScreen", "key_rows"]

_KEY_NAMES = {"space": "space", "full_stop": ".", "left_square_bracket": "[", "right_square_bracket": "]",
              "minus": "-", "plus": "+", "equals_sign": "=", "question_mark": "?", "escape": "esc",
              "ctrl+p": "ctrl+p", "up": "↑", "down": "↓", "home": "home", "end": "end", "f1": "F1"}


_LONG = {
    "acknowledge": "acknowledge the selected alarm (▶ marks it)",
    "acknowledge_all": "acknowledge every alarm waiting for it",
    "shelve": "shelve the selected alarm for a chosen time",
    "unshelve": "unshelve the selected alarm",
    "reset": "reset the selected latched alarm (⊡) once returned and acknowledged",
    "pause": "replay: pause or run",
    "step": "replay: step forward while paused",
    "seek(-1)": "replay: seek back 5 s (alarm timing starts over there)",
    "seek(1)": "replay: seek forward 5 s (the stretch still goes through the alarms)",
    "speed(-1)": "replay: slower", "speed(1)": "replay: faster (up to max)",
    "units": "switch SI / practical units (cm⁻³, eV, G, mTorr, Hz)",
    "derived": "narrow terminals: show the derived table instead of the map",
    "bell": "terminal bell on a new urgent/high alarm: on or off",
    "journal": "the alarm journal: every transition and operator action",
    "request_quit": "quit (asks first only while recording)",
    "help": "this page",
}


def key_rows(groups: list[tuple[str, list[Binding]]]) -> list[tuple[str, str, str]]:
    """(group, keys, what it does) for each binding."""
    rows = []
    for group, bindings in groups:
        for b in bindings:
            keys = ", ".join(_KEY_NAMES.get(k.strip(), k.strip()) for k in b.key.split(","))
            does = b.description or b.action
            long = _LONG.get(b.action)
            rows.append((group, keys, f"{does} — {long}" if long and long != does else does))
    return rows


class HelpScreen(ModalScreen[None]):
    """Lists the keys given to it; esc, ? or q closes."""

    BINDINGS = [Binding("escape,question_mark,f1", "close", "close")]

    def __init__(self, groups: list[tuple[str, list[Binding]]]) -> None:
        super().__init__()
        self.groups = groups

    def compose(self) -> ComposeResult:
        table = Table(box=None, padding=(0, 1), show_header=True, header_style=palette.LABEL)
        table.add_column("where", style=palette.DIM)
        table.add_column("key", style=palette.STRONG, no_wrap=True)
        table.add_column("does", style=palette.NORMAL)
        last = None
        for group, keys, does in key_rows(self.groups):
            table.add_row(group if group != last else "", keys, does)
            last = group
        self.table = table
        with VerticalScroll(id="help-box"):
            yield Static("Keys — the footer shows the main ones; ctrl+p lists every action by name.", classes="hint")
            yield Static(table)
            yield Static("Marks: ▲▲ urgent  ▲ high  △ advisory  ⊡ latched  ⇢ predicted  ◆ operating point  "
                         "✖ outside the box  ◼ STALE source. Colour always comes with one of these words or marks.",
                         classes="hint")

    def action_close(self) -> None:
        self.dismiss(None)
