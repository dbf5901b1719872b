"""Rows of styled cells laid out in padded columns as one Text: a fast stand-in for a Rich table grid."""

from __future__ import annotations

from typing import Sequence

from rich.text import Text

__all__ = ["grid_text"]


def grid_text(rows: Sequence[Sequence[Text | str]], *, gap: int = 1, right: Sequence[int] = (),
              max_width: int | None = None) -> Text:
    """Columns as wide as their widest cell; ``right`` lists right-aligned columns.

    Lines longer than ``max_width`` are cut with an ellipsis (no wrapping), so
    the height is always the number of rows. One Text, measured once: far
    cheaper per frame than a Rich table.
    """
    cells = [[c if isinstance(c, Text) else Text(c) for c in row] for row in rows]
    ncol = max((len(r) for r in cells), default=0)
    widths = [0] * ncol
    for row in cells:
        for i, c in enumerate(row):
            widths[i] = max(widths[i], c.cell_len)
    out = Text(no_wrap=True, overflow="ellipsis")
    for k, row in enumerate(cells):
        line = Text(no_wrap=True)
        for i, c in enumerate(row):
            if widths[i] == 0:
                continue
            pad = widths[i] - c.cell_len
            if i in right:
                line.append(" " * pad)
                line.append_text(c)
            else:
                line.append_text(c)
                if i < len(row) - 1:
                    line.append(" " * pad)
            if i < len(row) - 1:
                line.append(" " * gap)
        line.rstrip()
        if max_width is not None and line.cell_len > max_width:
            line.truncate(max(1, max_width - 1))
            line.append("…")
        out.append_text(line)
        if k < len(cells) - 1:
            out.append("\n")
    return out
