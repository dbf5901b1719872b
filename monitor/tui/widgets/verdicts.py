"""The plasma criteria as verdicts in words, each with its margin to failing (monitor.criteria.evaluate)."""

from __future__ import annotations

import math
from typing import Any, Callable

from rich.text import Text
from textual.app import RenderResult
from textual.reactive import reactive
from textual.widget import Widget

from monitor.snapshot import Snapshot
from monitor.tui import palette
from monitor.tui.formatting import fmt_number
from monitor.tui.renderables.grid import grid_text

__all__ = ["Verdicts", "verdict_rows"]


def _evaluator() -> Callable[[dict[str, float]], list[Any]] | None:
    try:
        from monitor.criteria import evaluate
    except ImportError:
        return None
    return evaluate


_SYMBOL = {"L/lambda_D": "L/λD", "N_D": "ND", "omega_pe/nu": "ωpe/ν", "ne/n_c": "ne/nc",
           "omega_ce/nu": "ωce/ν", "L/r_i": "L/ri"}
_SHORT = {  # (holds, fails) labels short enough for 80 columns
    "quasi_neutral": ("quasi-neutral", "NOT quasi-neutral"),
    "many_particles": ("many per Debye sphere", "FEW per Debye sphere"),
    "collective": ("collective", "COLLISION-DOMINATED"),
    "under_cutoff": ("under cutoff", "OVER CUTOFF"),
    "electrons_magnetised": ("electrons magnetised", "electrons NOT magnetised"),
    "ions_magnetised": ("ions magnetised", "ions NOT magnetised"),
}
NEAR_FACTOR = 3.0
"""A holding criterion within this factor of its threshold is shown as NEAR (our choice)."""


def verdict_rows(snapshot: Snapshot) -> list[tuple[str, str, Any, str, str, str]]:
    """(glyph, word, style, label, value text, margin text) per criterion, from the latest values."""
    evaluate = _evaluator()
    if evaluate is None:
        return [("?", "n/a", palette.DIM, "criteria module not available", "", "")]
    from monitor.criteria import CRITERIA
    by_name = {c.name: c for c in CRITERIA}
    values = {k: v for k, (v, _s) in snapshot.latest.items() if v is not None and math.isfinite(v)}
    rows = []
    for v in evaluate(values):
        c = by_name.get(v.name)
        yes, no = _SHORT.get(v.name, (c.yes, c.no) if c is not None else (v.text.split(":", 1)[0],) * 2)
        label = yes if v.holds or v.holds is None else no
        symbol = _SYMBOL.get(c.symbol, c.symbol) if c is not None else ""
        value = values.get(c.quantity) if c is not None else None
        shown = f"{symbol} {fmt_number(value)}" if value is not None else symbol
        if v.holds is None:
            rows.append(("?", "unknown", palette.DIM, label + "?", f"{symbol} unknown", ""))
        elif v.holds:
            close = _is_close(v.margin)
            rows.append(("!" if close else "✓", "near limit" if close else "holds",
                         palette.CAUTION if close else palette.OK_MARK, label + (" (near)" if close else ""), shown, f"margin ×{fmt_number(v.margin, 2)}"))
        else:
            short = 1.0 / v.margin if v.margin > 0 else math.inf
            rows.append(("✗", "FAILS", palette.ALERT, label, shown, f"short ×{fmt_number(short, 2)}"))
    return rows


def _is_close(margin: float) -> bool:
    """A holding verdict is near failing when its margin factor is under NEAR_FACTOR."""
    return margin is not None and math.isfinite(margin) and 1.0 <= margin < NEAR_FACTOR


class Verdicts(Widget):
    """One line per criterion: glyph, word, what holds or fails, the value and its margin factor."""

    DEFAULT_CSS = """
    Verdicts {
        height: auto;
    }
    """

    snapshot: reactive[Snapshot | None] = reactive(None, always_update=True)
    """The snapshot whose latest values are judged."""

    def __init__(self, *, name: str | None = None, id: str | None = None, classes: str | None = None) -> None:
        super().__init__(name=name, id=id, classes=classes)
        self._shape: object = None

    def watch_snapshot(self, snapshot: Snapshot | None) -> None:
        shape = None if snapshot is None else (tuple(sorted(snapshot.latest)), snapshot.discharge_on)
        if shape != self._shape:
            self._shape = shape
            self.refresh(layout=True)

    def render(self) -> RenderResult:
        snap = self.snapshot
        if snap is None or not snap.latest:
            return Text("no verdicts until ne and Te arrive", style=palette.DIM)
        if not snap.discharge_on:
            note = Text("discharge off: no plasma to judge", style=palette.DIM)
        else:
            note = None
        wide = (self.size.width or 44) >= 52
        rows: list[list[Text]] = []
        for glyph, word, style, label, shown, margin in verdict_rows(snap):
            # the word (holds / near limit / FAILS) is carried by the label's own wording and the glyph
            cells = [Text(glyph, style=style), Text(label, style=style if word != "holds" else palette.NORMAL)]
            cells += [Text(shown, style=palette.DIM)] if wide else []
            cells.append(Text(margin, style=style if word != "holds" else palette.DIM))
            rows.append(cells)
        if note is not None:
            rows.append([Text(""), note])
        return grid_text(rows, max_width=self.size.width or None)
