"""A braille-dot canvas (2x4 dots per cell) with layered styles and text labels, drawn from numpy arrays."""

from __future__ import annotations

import numpy as np
from rich.segment import Segment
from rich.style import Style

__all__ = ["BrailleCanvas"]

# Bit of each dot inside a braille cell, indexed [row 0..3][column 0..1]
# (Unicode braille patterns, U+2800 block).
_DOT_BITS = np.array([[0x01, 0x08], [0x02, 0x10], [0x04, 0x20], [0x40, 0x80]], dtype=np.uint8)


class BrailleCanvas:
    """``width`` x ``height`` cells, i.e. ``2*width`` x ``4*height`` dots.

    Pixel coordinates: x to the right, y upwards (0 at the bottom), as on a
    plot. Each drawing call names a layer (an int); a cell shows the style of
    the highest layer that drew in it. Text and glyphs replace a cell.
    """

    def __init__(self, width: int, height: int) -> None:
        self.width = max(1, width)
        self.height = max(1, height)
        self.bits = np.zeros((self.height, self.width), dtype=np.uint8)
        self.layer = np.full((self.height, self.width), -1, dtype=np.int16)
        self.text: dict[tuple[int, int], tuple[str, int]] = {}
        self.styles: dict[int, Style] = {}

    @property
    def px_width(self) -> int:
        return 2 * self.width

    @property
    def px_height(self) -> int:
        return 4 * self.height

    def style_layer(self, layer: int, style: Style) -> None:
        self.styles[layer] = style

    def dots(self, x: np.ndarray, y: np.ndarray, layer: int) -> None:
        """Set the dots at pixel coordinates (float arrays; out-of-range and NaN ignored)."""
        x = np.asarray(x, dtype=np.float64)
        y = np.asarray(y, dtype=np.float64)
        ok = np.isfinite(x) & np.isfinite(y)
        xi = np.floor(x[ok]).astype(np.int64)
        yi = np.floor(y[ok]).astype(np.int64)
        inside = (xi >= 0) & (xi < self.px_width) & (yi >= 0) & (yi < self.px_height)
        xi, yi = xi[inside], yi[inside]
        if xi.size == 0:
            return
        row_from_top = (self.px_height - 1) - yi
        cy, dy = np.divmod(row_from_top, 4)
        cx, dx = np.divmod(xi, 2)
        np.bitwise_or.at(self.bits, (cy, cx), _DOT_BITS[dy, dx])
        np.maximum.at(self.layer, (cy, cx), np.int16(layer))

    def line(self, x0: float, y0: float, x1: float, y1: float, layer: int) -> None:
        """A straight segment in pixel coordinates (sampled at half-dot steps)."""
        n = int(max(abs(x1 - x0), abs(y1 - y0)) * 2) + 2
        self.dots(np.linspace(x0, x1, n), np.linspace(y0, y1, n), layer)

    def put(self, col: int, row: int, text: str, layer: int) -> None:
        """Write ``text`` from cell (col, row), row 0 at the top; clipped at the edge."""
        for i, ch in enumerate(text):
            c = col + i
            if 0 <= c < self.width and 0 <= row < self.height:
                old = self.text.get((row, c))
                if old is None or old[1] <= layer:
                    self.text[(row, c)] = (ch, layer)

    def cell_of(self, x: float, y: float) -> tuple[int, int]:
        """(col, row from top) of the cell holding pixel (x, y)."""
        return int(x) // 2, ((self.px_height - 1) - int(y)) // 4

    def lines(self, base: Style | None = None) -> list[list[Segment]]:
        """The canvas as Rich segments, one list per row, runs of equal style merged."""
        out: list[list[Segment]] = []
        chars = np.where(self.bits > 0, self.bits.astype(np.uint32) + 0x2800, 0x20)
        for r in range(self.height):
            row: list[Segment] = []
            run_text: list[str] = []
            run_style: Style | None = None
            for c in range(self.width):
                t = self.text.get((r, c))
                if t is not None:
                    ch, layer = t
                else:
                    ch, layer = chr(int(chars[r, c])), int(self.layer[r, c])
                style = self.styles.get(layer, base) if layer >= 0 else base
                if style is not run_style and run_text:
                    row.append(Segment("".join(run_text), run_style))
                    run_text = []
                run_style = style
                run_text.append(ch)
            if run_text:
                row.append(Segment("".join(run_text), run_style))
            out.append(row)
        return out
