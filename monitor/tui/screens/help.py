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


def key_rows(groups: list[tuple[str, list[Binding]]]) -> list[tuple[str, str, str]]:
    """(group, keys, what it does) for each binding."""
    rows = []
    for group, bindings in groups:
        for b in bindings:
            keys = ", ".join(_KEY_NAMES.get(k.strip(), k.strip()) for k in b.key.split(","))
            rows.append((group, keys, b.description or b.action))
    return rows


class HelpScreen(ModalScreen[None]):
    """Lists the keys given to it; esc, ? or q closes."""

    BINDINGS = [Binding("escape,question_mark,f1", "close", "close")]

    def __init__(self, groups: list[tuple[str, list[Binding]]]) -> None:
        super().__init__()
        self.groups = groups

    def compose(self) -> ComposeResult:
        table = Table(box=None, padding=(0, 2), show_header=True, header_style=palette.LABEL)
        table.add_column("where", style=palette.DIM)
        table.add_column("key", style=palette.STRONG, no_wrap=True)
        table.add_column("does", style=palette.NORMAL)
        for group, keys, does in key_rows(self.groups):
            table.add_row(group, keys, does)
        with VerticalScroll(id="help-box"):
            yield Static("Keys — the footer shows the main ones; ctrl+p lists every action by name.", classes="hint")
            yield Static(table)

    def action_close(self) -> None:
        self.dismiss(None)
