"""Rows of styled cells laid out in padded columns as one Text: a fast stand-in for a Rich table grid that drops whole columns, never cuts a word."""

from __future__ import annotations

from typing import Sequence

from rich.text import Text

__all__ = ["grid_text", "cut_at_word"]


def cut_at_word(line: Text, width: int) -> Text:
    """``line`` cut to ``width`` cells at the last space that fits (an ellipsis marks the cut); a single
    word longer than ``width`` is cut where it must be."""
    if line.cell_len <= width:
        return line
    plain = line.plain
    end = plain.rfind(" ", 0, max(1, width - 1) + 1)
    keep = end if end > 0 else max(1, width - 1)
    out = line[:keep]
    out.rstrip()
    out.append("…")
    return out


def grid_text(rows: Sequence[Sequence[Text | str]], *, gap: int = 1, right: Sequence[int] = (),
              max_width: int | None = None, drop: Sequence[int] = ()) -> Text:
    """Columns as wide as their widest cell; ``right`` lists right-aligned columns.

    When the rows are wider than ``max_width``, whole columns are left out in the order ``drop`` gives
    (what the operator needs least first); a line still too long is cut at a word with an ellipsis. No
    wrapping, so the height is always the number of rows. One Text, measured once: far cheaper per
    frame than a Rich table.
    """
    cells = [[c if isinstance(c, Text) else Text(c) for c in row] for row in rows]
    ncol = max((len(r) for r in cells), default=0)
    widths = [0] * ncol
    for row in cells:
        for i, c in enumerate(row):
            widths[i] = max(widths[i], c.cell_len)
    shown = [True] * ncol
    if max_width is not None:
        pending = [d for d in drop if 0 <= d < ncol]

        def need() -> int:
            used = [w for w, s in zip(widths, shown) if s and w > 0]
            return sum(used) + gap * max(0, len(used) - 1)

        while pending and need() > max_width:
            shown[pending.pop(0)] = False
    out = Text(no_wrap=True, overflow="ellipsis")
    for k, row in enumerate(cells):
        line = Text(no_wrap=True)
        items = [(i, c) for i, c in enumerate(row) if shown[i] and widths[i] > 0]
        for j, (i, c) in enumerate(items):
            last = j == len(items) - 1
            pad = widths[i] - c.cell_len
            if i in right:
                line.append(" " * pad)
                line.append_text(c)
            else:
                line.append_text(c)
                if not last:
                    line.append(" " * pad)
            if not last:
                line.append(" " * gap)
        line.rstrip()
        if max_width is not None and line.cell_len > max_width:
            line = cut_at_word(line, max_width)
        out.append_text(line)
        if k < len(cells) - 1:
            out.append("\n")
    return out
