"""The ne-Te plane, log-log, in braille: a background drawn once per size (guides, labels, envelope, axes) and the point and fading trail per frame."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from rich.console import Console, ConsoleOptions, RenderResult
from rich.segment import Segment
from rich.style import Style

from monitor.physics import densities
from monitor.physics.constants import ELEMENTARY_CHARGE, EPSILON_0, EV_IN_K
from monitor.tui import palette
from monitor.tui.formatting import fmt_number
from monitor.tui.renderables.braille import BRAILLE_BASE, BrailleCanvas, dot_bits, segment_rows
from monitor.tui.renderables.map_legend import legend_rows
from monitor.tui.renderables.map_view import View, choose_view

__all__ = ["MapData", "Guides", "MapBackground", "RegimeMap", "density_at_debye_length", "density_at_debye_number",
           "cutoff_density", "STYLES", "frame_cells", "debye_label", "nd_label", "cutoff_label"]

# Index of each style in STYLES (the cells of a frame hold these indices).
S_BASE, S_FAINT, S_DIM, S_LABEL, S_DEBYE, S_ND, S_CUT, S_BOX, S_OLD, S_MID, S_NEW, S_POINT, S_ALERT = range(13)
STYLES: tuple[Style | None, ...] = (None, palette.FAINT, palette.DIM, palette.LABEL, palette.GUIDE_A, palette.GUIDE_B,
                                    palette.GUIDE_C, palette.BOX, palette.FAINT, palette.DIM, palette.NORMAL,
                                    palette.STRONG, palette.ALERT)
_ARROWS = {(-1, 0): "◀", (1, 0): "▶", (0, 1): "▲", (0, -1): "▼", (-1, 1): "◤", (1, 1): "◥", (-1, -1): "◣", (1, -1): "◢"}


def density_at_debye_length(te_ev: np.ndarray, length: float) -> np.ndarray:
    """n_e (m^-3) at which lambda_D = sqrt(eps0 Te / (e n_e)) equals ``length``: n_e = eps0 Te / (e L^2)."""
    return EPSILON_0 * np.asarray(te_ev, dtype=np.float64) / (ELEMENTARY_CHARGE * length * length)


def density_at_debye_number(te_ev: np.ndarray, n_d: float) -> np.ndarray:
    """n_e (m^-3) at which N_D = (4/3) pi n_e lambda_D^3 equals ``n_d``: n_e = ((4/3) pi (eps0 Te/e)^1.5 / N_D)^2."""
    te = np.asarray(te_ev, dtype=np.float64)
    return ((4.0 / 3.0) * math.pi * (EPSILON_0 * te / ELEMENTARY_CHARGE) ** 1.5 / n_d) ** 2


def cutoff_density(frequency_hz: float) -> float:
    """Critical density n_c (m^-3) of a wave of ordinary frequency f: monitor.physics.densities.cutoff_density."""
    return float(densities.cutoff_density(frequency_hz))


def _power(k: int) -> str:
    return {0: "1", 1: "10", 2: "100"}.get(k, f"1e{k}")


def debye_label(k: int) -> str:
    """The label of the line where the Debye length is L / 10^k."""
    return "λD=L" if k == 0 else f"λD=L/{_power(k)}"


def nd_label(n_d: float) -> str:
    """The label of the line of N_D particles per Debye sphere."""
    return f"ND={_power(int(round(math.log10(n_d))))}"


def cutoff_label(frequency_hz: float) -> str:
    """``cutoff 2.45 GHz``: the cutoff line named with its wave's frequency."""
    for scale, unit in ((1e9, "GHz"), (1e6, "MHz"), (1e3, "kHz"), (1.0, "Hz")):
        if frequency_hz >= scale:
            return f"cutoff {fmt_number(frequency_hz / scale)} {unit}"
    return f"cutoff {fmt_number(frequency_hz)} Hz"


@dataclass(frozen=True)
class Guides:
    """What the background depends on besides its size and view: device size, wave, envelope, units."""

    length: float | None = None                 # device size L (m)
    wave_frequency: float | None = None         # Hz
    box: tuple[float | None, float | None, float | None, float | None] = (None, None, None, None)  # ne lo, hi, Te lo, hi
    system: str = "practical"


@dataclass(frozen=True, eq=False)
class MapData:
    """What the map draws; densities in m^-3 and temperatures in eV (canonical).

    ``judged`` is False while a discharge is off (regime alarms suppressed by design): a point outside
    the box is then said in plain words, never in alarm colour. ``stale_age``, when not None, is the age
    in words of a point whose inputs are stale: it is drawn hollow and dim.
    """

    trail_ne: np.ndarray
    trail_te: np.ndarray
    point: tuple[float, float] | None           # (ne, Te) now
    length: float | None = None
    wave_frequency: float | None = None
    box: tuple[float | None, float | None, float | None, float | None] = (None, None, None, None)
    system: str = "practical"
    judged: bool = True
    stale_age: str | None = None

    @property
    def guides(self) -> Guides:
        return Guides(self.length, self.wave_frequency, self.box, self.system)

    def outside(self) -> bool:
        """True when the operating point lies outside the envelope's box."""
        if self.point is None:
            return False
        ne, te = self.point
        lo_n, hi_n, lo_t, hi_t = self.box
        return bool((lo_n is not None and ne < lo_n) or (hi_n is not None and ne > hi_n)
                    or (lo_t is not None and te < lo_t) or (hi_t is not None and te > hi_t))


class MapBackground:
    """Everything that does not move, drawn once for a size, a view and the guides: the plot's braille
    bits and labels, the Te axis labels at the left, the ne axis labels below. Rows of the plot are
    ``plot_h`` from the top; two (or one) legend rows below the axis row are left to the frame."""

    def __init__(self, guides: Guides, view: View, width: int, height: int) -> None:
        self.guides, self.view, self.width, self.height = guides, view, width, height
        practical = guides.system == "practical"
        self.legend_h = 2 if height >= 14 else 1
        self.y_labels = self._y_labels(practical)
        self.margin = max(len(s) for s in self.y_labels.values()) + 1 if self.y_labels else 3
        self.margin = max(self.margin, 3)
        self.plot_w = max(4, width - self.margin)
        self.plot_h = max(3, height - 1 - self.legend_h)
        cv = BrailleCanvas(self.plot_w, self.plot_h)
        self.sx = (cv.px_width - 1) / (view.x1 - view.x0)
        self.sy = (cv.px_height - 1) / (view.y1 - view.y0)
        self._draw(cv)
        codes, layer = cv.grids()
        self.plot_bits = np.where(cv.text > 0, 0, cv.bits).astype(np.uint8)
        self.plot_text = cv.text > 0
        self.codes = np.full((height, width), 0x20, dtype=np.uint32)
        self.style = np.zeros((height, width), dtype=np.int16)
        self.codes[:self.plot_h, self.margin:self.margin + self.plot_w] = codes
        self.style[:self.plot_h, self.margin:self.margin + self.plot_w] = np.where(layer < 0, S_BASE, layer)
        self._frame_axes(practical)

    # -- geometry ---------------------------------------------------------------------------------------
    def px(self, ne: np.ndarray | float) -> np.ndarray:
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.asarray((np.log10(ne) - self.view.x0) * self.sx, dtype=np.float64)

    def py(self, te: np.ndarray | float) -> np.ndarray:
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.asarray((np.log10(te) - self.view.y0) * self.sy, dtype=np.float64)

    def _y_labels(self, practical: bool) -> dict[int, str]:
        v = self.view
        out = {}
        for e in range(int(v.y0), int(v.y1) + 1):
            out[e] = {0: "1", 1: "10", 2: "100", -1: "0.1", -2: ".01"}.get(e, f"1e{e}") if practical else \
                f"{10.0 ** e * EV_IN_K:.1e}".replace("e+0", "e").replace("e+", "e")
        return out

    # -- drawing ----------------------------------------------------------------------------------------
    def _curve(self, te: np.ndarray, ne: np.ndarray, every: float) -> tuple[np.ndarray, np.ndarray]:
        """Pixel points of a curve; ``every`` > 0 keeps one dot per that many pixels of path (dotted)."""
        xs, ys = self.px(ne), self.py(te)
        if every <= 0:
            return xs, ys
        step = np.hypot(np.diff(xs, prepend=xs[:1]), np.diff(ys, prepend=ys[:1]))
        path = np.cumsum(np.where(np.isfinite(step), step, 0.0))
        keep = np.diff(np.floor(path / every), prepend=-1.0) > 0
        return xs[keep], ys[keep]

    def _draw(self, cv: BrailleCanvas) -> None:
        g, v = self.guides, self.view
        n = 4 * (cv.px_width + cv.px_height)
        te_axis = np.logspace(v.y0, v.y1, n)
        for e in range(int(v.x0), int(v.x1) + 1):            # decade ticks along the edges
            cv.dots(np.array([(e - v.x0) * self.sx]), np.array([0.0]), S_FAINT)
        for e in range(int(v.y0), int(v.y1) + 1):
            cv.dots(np.array([0.0]), np.array([(e - v.y0) * self.sy]), S_FAINT)
        curves: list[tuple[np.ndarray, np.ndarray, str, bool]] = []
        if g.length:
            for k in range(0, 7):                             # constant Debye length: solid
                xs, ys = self._curve(te_axis, density_at_debye_length(te_axis, g.length / 10.0 ** k), 0.0)
                cv.dots(xs, ys, S_DEBYE)
                curves.append((xs, ys, debye_label(k), False))
        for n_d in (1.0, 1e3, 1e6, 1e9):                     # constant N_D: dotted
            xs, ys = self._curve(te_axis, density_at_debye_number(te_axis, n_d), 3.0)
            cv.dots(xs, ys, S_ND)
            curves.append((xs, ys, nd_label(n_d), True))
        if g.wave_frequency:                                   # cutoff: dashed vertical
            xc = float(self.px(cutoff_density(g.wave_frequency)))
            if 0 <= xc < cv.px_width:
                ys = np.arange(0, cv.px_height, dtype=np.float64)
                ys = ys[(ys.astype(np.int64) % 4) < 2]
                cv.dots(np.full(ys.size, xc), ys, S_CUT)
                col, _ = cv.cell_of(xc, 0)
                text = cutoff_label(g.wave_frequency)
                start = col + 1 if col + 1 + len(text) <= cv.width else max(0, col - len(text))
                cv.put(start, 0, text, S_LABEL)
        self._box(cv)
        for xs, ys, text, low in curves:
            self._label(cv, xs, ys, text, low)

    @staticmethod
    def _label(cv: BrailleCanvas, xs: np.ndarray, ys: np.ndarray, text: str, low: bool) -> None:
        """Write ``text`` beside the visible part of its curve where it overlaps no other label."""
        ok = np.flatnonzero((xs >= 0) & (xs < cv.px_width) & (ys >= 0) & (ys < cv.px_height))
        if ok.size == 0:
            return
        fractions = (0.2, 0.35, 0.5, 0.1, 0.65) if low else (0.97, 0.85, 0.7, 0.55, 0.4)
        for f in fractions:
            i = ok[min(ok.size - 1, int(f * ok.size))]
            col, row = cv.cell_of(float(xs[i]), float(ys[i]))
            for c in (col + 1, col - len(text)):
                c = min(max(c, 0), cv.width - len(text))
                if cv.free(c, row, len(text)):
                    cv.put(c, row, text, S_LABEL)
                    return

    def _box(self, cv: BrailleCanvas) -> None:
        lo_n, hi_n, lo_t, hi_t = self.guides.box
        if all(b is None for b in self.guides.box):
            return
        xa = float(self.px(lo_n)) if lo_n else -1.0
        xb = float(self.px(hi_n)) if hi_n else cv.px_width + 1.0
        ya = float(self.py(lo_t)) if lo_t else -1.0
        yb = float(self.py(hi_t)) if hi_t else cv.px_height + 1.0
        for x in (xa, xb):
            cv.line(x, max(ya, 0.0), x, min(yb, cv.px_height - 1.0), S_BOX)
        for y in (ya, yb):
            cv.line(max(xa, 0.0), y, min(xb, cv.px_width - 1.0), y, S_BOX)

    def _put(self, row: int, col: int, text: str, style: int) -> None:
        end = min(self.width, col + len(text))
        if 0 <= row < self.height and col < end:
            self.codes[row, col:end] = [ord(c) for c in text[:end - col]]
            self.style[row, col:end] = style

    def _frame_axes(self, practical: bool) -> None:
        v, m = self.view, self.margin
        for r in range(self.plot_h):
            self._put(r, m - 1, "│", S_DIM)
        for e, lab in self.y_labels.items():
            r = (4 * self.plot_h - 1 - int((e - v.y0) * self.sy)) // 4
            self._put(r, m - 1 - len(lab), lab + "┤", S_DIM)
        if 0 not in [(4 * self.plot_h - 1 - int((e - v.y0) * self.sy)) // 4 for e in self.y_labels]:
            self._put(0, 0, "Te", S_DIM)
        axis_row = self.plot_h
        unit = "eV" if practical else "K"
        self._put(axis_row, 0, unit.rjust(m - 1)[-(m - 1):] + "└", S_DIM)
        used = np.zeros(self.plot_w + 1, dtype=bool)
        n_unit = "ne cm⁻³" if practical else "ne m⁻³"
        used[self.plot_w - len(n_unit) - 1:] = True
        shift = -6 if practical else 0
        for e in range(int(v.x0), int(v.x1) + 1):
            col = int((e - v.x0) * self.sx) // 2
            text = f"1e{e + shift}"
            start = min(max(col - len(text) // 2, 0), self.plot_w - len(text))
            if not used[max(0, start - 1):start + len(text) + 1].any():
                used[start:start + len(text)] = True
                self._put(axis_row, m + start, text, S_DIM)
        self._put(axis_row, m + self.plot_w - len(n_unit), n_unit, S_LABEL)


def frame_cells(bg: MapBackground, data: MapData) -> tuple[np.ndarray, np.ndarray]:
    """(code points, style indices) of one frame: the cached background with the fading trail, the
    outliers as edge arrows, the point (with a clear halo, so it reads larger than the grid) and the legend."""
    codes, style = bg.codes.copy(), bg.style.copy()
    beyond = False
    m, w, h = bg.margin, bg.plot_w, bg.plot_h
    pc, ps = codes[:h, m:m + w], style[:h, m:m + w]
    ne, te = np.asarray(data.trail_ne, dtype=np.float64), np.asarray(data.trail_te, dtype=np.float64)
    if ne.size and ne.size == te.size:
        ok = np.isfinite(ne) & np.isfinite(te) & (ne > 0) & (te > 0)
        xs, ys = bg.px(ne[ok]), bg.py(te[ok])
        thirds = np.array_split(np.arange(xs.size), 3)
        acc = bg.plot_bits.copy()
        for idx, st in zip(thirds, (S_OLD, S_MID, S_NEW)):   # oldest first, newer dots take the cell's style
            bits = dot_bits(xs[idx], ys[idx], w, h)
            hit = (bits > 0) & ~bg.plot_text
            acc |= bits
            pc[hit] = BRAILLE_BASE + acc[hit].astype(np.uint32)
            ps[hit] = st
        out = (xs < 0) | (xs >= 2 * w) | (ys < 0) | (ys >= 4 * h)
        beyond = bool(out.any())
        if beyond:
            _edge_arrows(pc, ps, xs[out], ys[out], w, h, S_DIM)
    outside = data.outside()
    off_map = False
    if data.point is not None and data.point[0] > 0 and data.point[1] > 0:
        x, y = float(bg.px(data.point[0])), float(bg.py(data.point[1]))
        col, row = int(math.floor(x)) // 2, (4 * h - 1 - int(math.floor(y))) // 4
        inside = 0 <= col < w and 0 <= row < h
        alert = outside and data.judged and data.stale_age is None
        st = S_ALERT if alert else (S_DIM if data.stale_age is not None else S_POINT)
        if inside:
            r0, r1, c0, c1 = max(0, row - 1), min(h, row + 2), max(0, col - 1), min(w, col + 2)
            halo = ~bg.plot_text[r0:r1, c0:c1]
            pc[r0:r1, c0:c1][halo] = 0x20
            glyph = "◇" if data.stale_age is not None else ("✖" if alert else "◆")
            pc[row, col], ps[row, col] = ord(glyph), st
        else:
            off_map = True
            _edge_arrows(pc, ps, np.array([x]), np.array([y]), w, h, st)
    for i, row_cells in enumerate(legend_rows(data, outside=outside, off_map=off_map, width=bg.width, rows=bg.legend_h,
                                                 beyond=beyond)):
        r = bg.height - bg.legend_h + i
        codes[r, :] = 0x20
        style[r, :] = S_BASE
        col = 0
        for text, st in row_cells:
            n = min(len(text), bg.width - col)
            if n <= 0:
                break
            codes[r, col:col + n] = [ord(c) for c in text[:n]]
            style[r, col:col + n] = st
            col += n
    return codes, style


def _edge_arrows(pc: np.ndarray, ps: np.ndarray, xs: np.ndarray, ys: np.ndarray, w: int, h: int, st: int) -> None:
    """Points beyond the view as arrows on the edge cell nearest to them, pointing their way."""
    dx = np.where(xs < 0, -1, np.where(xs >= 2 * w, 1, 0))
    dy = np.where(ys < 0, -1, np.where(ys >= 4 * h, 1, 0))
    cols = np.clip(np.floor(np.nan_to_num(xs, nan=0.0, posinf=1e9, neginf=-1e9)).astype(np.int64) // 2, 0, w - 1)
    rows = np.clip((4 * h - 1 - np.floor(np.nan_to_num(ys, nan=0.0, posinf=1e9, neginf=-1e9)).astype(np.int64)) // 4, 0, h - 1)
    key = np.unique(np.stack([rows, cols, dx, dy], axis=1), axis=0)
    for r, c, ax, ay in key[:64].tolist():
        pc[r, c], ps[r, c] = ord(_ARROWS.get((ax, ay), "•")), st


class RegimeMap:
    """Rich renderable of one frame (tests and previews; the widget keeps its background between frames)."""

    def __init__(self, data: MapData, width: int, height: int, view: View | None = None) -> None:
        self.data = data
        self.width = width
        self.height = height
        self.view = view or choose_view(data.box, data.trail_ne, data.trail_te)

    def __rich_console__(self, console: Console, options: ConsoleOptions) -> RenderResult:
        width = min(self.width, options.max_width)
        for row in self.build(width, self.height):
            yield from row
            yield Segment.line()

    def build(self, width: int, height: int) -> list[list[Segment]]:
        bg = MapBackground(self.data.guides, self.view, width, height)
        codes, style = frame_cells(bg, self.data)
        return segment_rows(codes, style, STYLES)
