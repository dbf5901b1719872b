"""A braille-dot canvas (2x4 dots per cell) with layered styles and text labels, drawn and turned into segments with numpy."""

from __future__ import annotations

from typing import Sequence

import numpy as np
from rich.segment import Segment
from rich.style import Style

__all__ = ["BrailleCanvas", "BRAILLE_BASE", "dot_bits", "segment_rows"]

# Bit of each dot inside a braille cell, indexed [row 0..3][column 0..1]
# (Unicode braille patterns, U+2800 block).
_DOT_BITS = np.array([[0x01, 0x08], [0x02, 0x10], [0x04, 0x20], [0x40, 0x80]], dtype=np.uint8)
BRAILLE_BASE = 0x2800


def dot_bits(x: np.ndarray, y: np.ndarray, width: int, height: int) -> np.ndarray:
    """``height`` x ``width`` cells of braille bits set by the dots at pixel coordinates (x right, y up from
    the bottom; NaN and out-of-range dots ignored). One vectorised pass, no per-dot Python."""
    bits = np.zeros((height, width), dtype=np.uint8)
    x = np.asarray(x, dtype=np.float64)
    y = np.asarray(y, dtype=np.float64)
    ok = np.isfinite(x) & np.isfinite(y)
    xi = np.floor(x[ok]).astype(np.int64)
    yi = np.floor(y[ok]).astype(np.int64)
    inside = (xi >= 0) & (xi < 2 * width) & (yi >= 0) & (yi < 4 * height)
    xi, yi = xi[inside], yi[inside]
    if xi.size:
        row_from_top = (4 * height - 1) - yi
        cy, dy = np.divmod(row_from_top, 4)
        cx, dx = np.divmod(xi, 2)
        np.bitwise_or.at(bits, (cy, cx), _DOT_BITS[dy, dx])
    return bits


def segment_rows(codes: np.ndarray, style_index: np.ndarray, styles: Sequence[Style | None]) -> list[list[Segment]]:
    """Rows of Rich segments from a grid of code points and a grid of indices into ``styles``; runs of
    equal style become one segment (the run boundaries found with numpy, the text decoded per row)."""
    out: list[list[Segment]] = []
    height, width = codes.shape
    raw = np.ascontiguousarray(codes, dtype="<u4")
    for r in range(height):
        text = raw[r].tobytes().decode("utf-32-le")
        st = style_index[r]
        cuts = np.flatnonzero(st[1:] != st[:-1]) + 1
        starts = [0, *cuts.tolist()]
        ends = [*cuts.tolist(), width]
        out.append([Segment(text[a:b], styles[int(st[a])]) for a, b in zip(starts, ends)])
    return out


class BrailleCanvas:
    """``width`` x ``height`` cells, i.e. ``2*width`` x ``4*height`` dots.

    Pixel coordinates: x to the right, y upwards (0 at the bottom), as on a
    plot. Each drawing call names a layer (an int >= 0); a cell shows the style
    of the highest layer that drew in it. Text and glyphs replace a cell.
    """

    def __init__(self, width: int, height: int) -> None:
        self.width = max(1, width)
        self.height = max(1, height)
        self.bits = np.zeros((self.height, self.width), dtype=np.uint8)
        self.layer = np.full((self.height, self.width), -1, dtype=np.int16)
        self.text = np.zeros((self.height, self.width), dtype=np.uint32)   # 0: no text in the cell
        self.text_layer = np.full((self.height, self.width), -1, dtype=np.int16)
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
        bits = dot_bits(x, y, self.width, self.height)
        hit = bits > 0
        self.bits |= bits
        self.layer[hit] = np.maximum(self.layer[hit], np.int16(layer))

    def line(self, x0: float, y0: float, x1: float, y1: float, layer: int) -> None:
        """A straight segment in pixel coordinates (sampled at half-dot steps)."""
        n = int(max(abs(x1 - x0), abs(y1 - y0)) * 2) + 2
        self.dots(np.linspace(x0, x1, n), np.linspace(y0, y1, n), layer)

    def put(self, col: int, row: int, text: str, layer: int) -> None:
        """Write ``text`` from cell (col, row), row 0 at the top; clipped at the edge; a lower layer never
        overwrites a higher one's text."""
        if not 0 <= row < self.height:
            return
        for i, ch in enumerate(text):
            c = col + i
            if 0 <= c < self.width and self.text_layer[row, c] <= layer:
                self.text[row, c] = ord(ch)
                self.text_layer[row, c] = layer

    def clear_text(self, col: int, row: int, length: int) -> None:
        """Remove any text from ``length`` cells from (col, row)."""
        if 0 <= row < self.height:
            self.text[row, max(0, col):max(0, col + length)] = 0
            self.text_layer[row, max(0, col):max(0, col + length)] = -1

    def free(self, col: int, row: int, length: int) -> bool:
        """True when those cells are on the canvas and no text lies in them or in the cell either side."""
        if not (0 <= row < self.height and col >= 0 and col + length <= self.width):
            return False
        return not bool(self.text[row, max(0, col - 1):col + length + 1].any())

    def cell_of(self, x: float, y: float) -> tuple[int, int]:
        """(col, row from top) of the cell holding pixel (x, y)."""
        return int(x) // 2, ((self.px_height - 1) - int(y)) // 4

    def grids(self) -> tuple[np.ndarray, np.ndarray]:
        """(code points, layer) per cell: text over braille dots over blank (layer -1)."""
        has_text = self.text > 0
        codes = np.where(has_text, self.text, np.where(self.bits > 0, self.bits.astype(np.uint32) + BRAILLE_BASE, 0x20))
        layer = np.where(has_text, self.text_layer, self.layer)
        return codes.astype(np.uint32), layer.astype(np.int16)

    def lines(self, base: Style | None = None) -> list[list[Segment]]:
        """The canvas as Rich segments, one list per row, runs of equal style merged."""
        codes, layer = self.grids()
        order = sorted(self.styles)
        table: list[Style | None] = [base] + [self.styles[k] for k in order]
        index = np.zeros(layer.shape, dtype=np.int16)
        for i, k in enumerate(order, start=1):
            index[layer == k] = i
        return segment_rows(codes, index, table)
