"""The plasma criteria as verdicts in words, each with its margin to failing (monitor.criteria.evaluate)."""

from __future__ import annotations

import math
from typing import Any, Callable

from rich.table import Table
from rich.text import Text
from textual.app import RenderResult
from textual.reactive import reactive
from textual.widget import Widget

from monitor.snapshot import Snapshot
from monitor.tui import palette

__all__ = ["Verdicts", "verdict_rows"]


def _evaluator() -> Callable[[dict[str, float]], list[Any]] | None:
    try:
        from monitor.criteria import evaluate
    except ImportError:
        return None
    return evaluate


def verdict_rows(snapshot: Snapshot) -> list[tuple[str, str, Any, str]]:
    """(glyph, word, style, text) per criterion, from the latest values."""
    evaluate = _evaluator()
    if evaluate is None:
        return [("?", "n/a", palette.DIM, "criteria module not available")]
    values = {k: v for k, (v, _s) in snapshot.latest.items() if v is not None and math.isfinite(v)}
    rows = []
    for v in evaluate(values):
        if v.holds is None:
            rows.append(("?", "unknown", palette.DIM, v.text))
        elif v.holds:
            close = _is_close(v.margin)
            rows.append(("!" if close else "✓", "NEAR" if close else "holds", palette.CAUTION if close else palette.OK_MARK, v.text))
        else:
            rows.append(("✗", "FAILS", palette.ALERT, v.text))
    return rows


def _is_close(margin: float) -> bool:
    """A holding verdict is near failing when its margin (decades to the threshold) is under half a decade."""
    return margin is not None and math.isfinite(margin) and 0.0 <= margin < 0.5


class Verdicts(Widget):
    """One line per criterion: glyph, word, and the criterion's own text with its margin."""

    DEFAULT_CSS = """
    Verdicts {
        height: auto;
    }
    """

    snapshot: reactive[Snapshot | None] = reactive(None, always_update=True)
    """The snapshot whose latest values are judged."""

    def __init__(self, *, name: str | None = None, id: str | None = None, classes: str | None = None) -> None:
        super().__init__(name=name, id=id, classes=classes)

    def render(self) -> RenderResult:
        snap = self.snapshot
        if snap is None or not snap.latest:
            return Text("no verdicts until ne and Te arrive", style=palette.DIM)
        if not snap.discharge_on:
            note = Text("discharge off: verdicts held", style=palette.DIM)
        else:
            note = None
        table = Table.grid(padding=(0, 1))
        table.add_column(no_wrap=True)
        table.add_column(no_wrap=True, min_width=7)
        table.add_column(style=palette.NORMAL, overflow="ellipsis", no_wrap=True)
        for glyph, word, style, text in verdict_rows(snap):
            table.add_row(Text(glyph, style=style), Text(word, style=style), text)
        if note is not None:
            table.add_row("", "", note)
        return table
