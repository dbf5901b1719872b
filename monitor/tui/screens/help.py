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


MAP_HELP = """The ne–Te map
Electron density across, electron temperature up, both in decades; units follow u.
◆   the operating point now; its trail fades with age (older dots fainter).
⠒⠒  solid lines: constant Debye length, λD=L/10ᵏ (L: the device size in the config).
    Left of λD=L the Debye length exceeds the device: not quasi-neutral there.
⠂ ⠂ dotted lines: constant ND, electrons in a Debye sphere (ND=1e3 ...). ND falls
    as density rises: right of ND=1 there is under one electron per sphere.
⡆   dashed line: the cutoff density of the wave, named with its frequency
    (cutoff 2.45 GHz); to its right the wave cannot propagate (overdense).
⡇   the box: the envelope, from the limits on ne and Te.
✖   in alarm colour: outside the envelope while a discharge is on. With no
    discharge, or the limits suppressed by design, nothing is judged: the point
    stays ◆ and the legend says "not judged".
◇   the last point, hollow and dim: its readings are stale.
◀▶▲▼ on an edge: data beyond the view. The view holds the envelope and the
    2nd-98th percentile of recent readings (at most a decade past the envelope),
    so a few outliers never rescale it.

In the derived table, "(!)" after a ± marks an uncertainty that first-order propagation
does not give well here (the inputs' relative sigmas are too large for that quantity's
curvature): `regime calc --mc N` and the report give its 16th-84th percentile interval."""


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
                         "✖ outside the envelope  ◇ stale point  ◼ STALE source. Colour always comes with one of these "
                         "words or marks. A struck, dimmed number is not live: its age is written beside it.",
                         classes="hint")
            yield Static(MAP_HELP, classes="hint", id="map-help")

    def action_close(self) -> None:
        self.dismiss(None)
