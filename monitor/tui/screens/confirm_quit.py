"""Asked only when a recording is open: quit and close it, or stay."""

from __future__ import annotations

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import Label

__all__ = ["ConfirmQuit"]


class ConfirmQuit(ModalScreen[bool]):
    """Dismisses True to quit."""

    BINDINGS = [
        Binding("y", "answer(True)", "quit"),
        Binding("n,escape", "answer(False)", "stay"),
    ]

    def __init__(self, recording: str) -> None:
        super().__init__()
        self.recording = recording

    def compose(self) -> ComposeResult:
        with Vertical(id="dialog"):
            yield Label(f"Recording to {self.recording}.")
            yield Label("Quit now? The recording is closed cleanly.")
            yield Label("y quit · n stay", classes="hint")

    def action_answer(self, quit_: bool) -> None:
        self.dismiss(quit_)
