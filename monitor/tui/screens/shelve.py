"""The shelve dialog: choose for how long the selected alarm is shelved (or cancel)."""

from __future__ import annotations

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import Label, OptionList
from textual.widgets.option_list import Option

__all__ = ["ShelveDialog", "DURATIONS"]

# (label, seconds or None for a one-shot shelve: it ends when the alarm returns, or at max_shelve)
DURATIONS: tuple[tuple[str, float | None], ...] = (
    ("10 minutes", 600.0), ("30 minutes", 1800.0), ("1 hour", 3600.0), ("4 hours", 14400.0),
    ("until it returns (one-shot)", None),
)


class ShelveDialog(ModalScreen[float | None | bool]):
    """Dismisses with seconds, None (one-shot: until the alarm returns) or False (cancelled)."""

    BINDINGS = [
        Binding("escape", "cancel", "cancel"),
        Binding("1", "pick(0)", show=False), Binding("2", "pick(1)", show=False),
        Binding("3", "pick(2)", show=False), Binding("4", "pick(3)", show=False),
        Binding("5", "pick(4)", show=False),
    ]

    def __init__(self, alarm: str) -> None:
        super().__init__()
        self.alarm = alarm

    def compose(self) -> ComposeResult:
        with Vertical(id="dialog"):
            yield Label("Shelve for how long?")
            yield Label(self.alarm, id="shelve-alarm")      # own line, wraps: a long id is never cut
            yield OptionList(*[Option(f"{i + 1}  {label}", id=str(i)) for i, (label, _s) in enumerate(DURATIONS)])
            yield Label("enter or 1-5 to choose · esc to cancel", classes="hint")

    def on_option_list_option_selected(self, event: OptionList.OptionSelected) -> None:
        self.action_pick(int(event.option.id or 0))

    def action_pick(self, index: int) -> None:
        self.dismiss(DURATIONS[index][1])

    def action_cancel(self) -> None:
        self.dismiss(False)
