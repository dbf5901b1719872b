"""The ne-Te plane, log-log, in braille: Debye-length and N_D guides, cutoff, envelope box, operating point and trail."""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable

import numpy as np
from rich.console import Console, ConsoleOptions, RenderResult
from rich.segment import Segment

from monitor.physics import densities
from monitor.physics.constants import ELEMENTARY_CHARGE, EPSILON_0, EV_IN_K
from monitor.tui import palette
from monitor.tui.renderables.braille import BrailleCanvas

__all__ = ["MapData", "RegimeMap", "density_at_debye_length", "density_at_debye_number", "cutoff_density", "axis_range"]


# layers, lowest first
_L_AXIS, _L_ND, _L_DEBYE, _L_CUT, _L_BOX, _L_TRAIL, _L_LABEL, _L_POINT = range(8)


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


@dataclass(frozen=True, eq=False)
class MapData:
    """What the map draws; densities in m^-3 and temperatures in eV (canonical)."""

    trail_ne: np.ndarray
    trail_te: np.ndarray
    point: tuple[float, float] | None           # (ne, Te) now
    length: float | None = None                 # device size L (m)
    wave_frequency: float | None = None          # Hz
    box: tuple[float | None, float | None, float | None, float | None] = (None, None, None, None)  # ne lo, hi, Te lo, hi
    system: str = "practical"

    def outside(self) -> bool:
        """True when the operating point lies outside the envelope's box."""
        if self.point is None:
            return False
        ne, te = self.point
        lo_n, hi_n, lo_t, hi_t = self.box
        return bool((lo_n is not None and ne < lo_n) or (hi_n is not None and ne > hi_n)
                    or (lo_t is not None and te < lo_t) or (hi_t is not None and te > hi_t))


def axis_range(values: list[float], default: tuple[float, float]) -> tuple[float, float]:
    """Whole decades (log10) covering ``default`` and every finite positive value, half a decade of room."""
    lo, hi = default
    logs = [math.log10(v) for v in values if v is not None and math.isfinite(v) and v > 0]
    if logs:
        lo = min(lo, math.floor(min(logs) - 0.5))
        hi = max(hi, math.ceil(max(logs) + 0.5))
    return float(lo), float(hi)


def _decade_label(exp: int, factor_exp: int = 0) -> str:
    e = exp + factor_exp
    return {0: "1", 1: "10", 2: "100", -1: "0.1", -2: ".01"}.get(e, f"1e{e}")


class RegimeMap:
    """Rich renderable: log10 n_e across, log10 T_e up, filling the given width and height."""

    def __init__(self, data: MapData, width: int, height: int) -> None:
        self.data = data
        self.width = width
        self.height = height

    def __rich_console__(self, console: Console, options: ConsoleOptions) -> RenderResult:
        width = min(self.width, options.max_width)
        for row in self.build(width, self.height):
            yield from row
            yield Segment.line()

    def build(self, width: int, height: int) -> list[list[Segment]]:
        d = self.data
        margin = 5 if d.system == "practical" else 6
        plot_w, plot_h = max(4, width - margin), max(3, height - 2)
        box = d.box
        tr_ne = d.trail_ne[np.isfinite(d.trail_ne) & (d.trail_ne > 0)] if d.trail_ne.size else d.trail_ne
        tr_te = d.trail_te[np.isfinite(d.trail_te) & (d.trail_te > 0)] if d.trail_te.size else d.trail_te
        extra_n = [box[0], box[1]] + ([d.point[0]] if d.point else []) + ([float(tr_ne.min()), float(tr_ne.max())] if tr_ne.size else [])
        extra_t = [box[2], box[3]] + ([d.point[1]] if d.point else []) + ([float(tr_te.min()), float(tr_te.max())] if tr_te.size else [])
        x0, x1 = axis_range(extra_n, (14.0, 19.0))
        y0, y1 = axis_range(extra_t, (-1.0, 2.0))
        cv = BrailleCanvas(plot_w, plot_h)
        for layer, style in ((_L_AXIS, palette.FAINT), (_L_ND, palette.GUIDE_B), (_L_DEBYE, palette.GUIDE_A),
                             (_L_CUT, palette.GUIDE_C), (_L_BOX, palette.BOX), (_L_TRAIL, palette.DIM),
                             (_L_LABEL, palette.LABEL)):
            cv.style_layer(layer, style)
        outside = d.outside()
        cv.style_layer(_L_POINT, palette.ALERT if outside else palette.STRONG)
        sx = (cv.px_width - 1) / (x1 - x0)
        sy = (cv.px_height - 1) / (y1 - y0)

        def px(ne: np.ndarray | float) -> np.ndarray:
            with np.errstate(divide="ignore", invalid="ignore"):
                return (np.log10(ne) - x0) * sx

        def py(te: np.ndarray | float) -> np.ndarray:
            with np.errstate(divide="ignore", invalid="ignore"):
                return (np.log10(te) - y0) * sy

        # decade ticks along the edges
        for e in range(int(x0), int(x1) + 1):
            cv.dots(np.array([(e - x0) * sx]), np.array([0.0]), _L_AXIS)
        for e in range(int(y0), int(y1) + 1):
            cv.dots(np.array([0.0]), np.array([(e - y0) * sy]), _L_AXIS)
        te_axis = np.logspace(y0, y1, 4 * cv.px_height)
        if d.length:
            for k in range(0, 7):
                lam = d.length / 10.0 ** k
                ne_line = density_at_debye_length(te_axis, lam)
                xs, ys = px(ne_line), py(te_axis)
                cv.dots(xs, ys, _L_DEBYE)
                self._label(cv, xs, ys, "λD=L" if k == 0 else (f"L/{10 ** k}" if k < 3 else f"L/1e{k}"), _L_LABEL)
        for n_d in (1.0, 1e3, 1e6):
            ne_line = density_at_debye_number(te_axis, n_d)
            xs, ys = px(ne_line), py(te_axis)
            cv.dots(xs, ys, _L_ND)
            self._label(cv, xs, ys, "ND=1" if n_d == 1.0 else f"ND=1e{int(math.log10(n_d))}", _L_LABEL, low=True)
        if d.wave_frequency:
            xc = float(px(cutoff_density(d.wave_frequency)))
            if 0 <= xc < cv.px_width:
                cv.dots(np.full(cv.px_height // 2, xc), np.arange(0, cv.px_height, 2, dtype=np.float64), _L_CUT)
                col, _ = cv.cell_of(xc, 0)
                cv.put(min(col + 1, cv.width - 6), 0, "cutoff", _L_LABEL)
        self._box(cv, px, py, box)
        if tr_ne.size and tr_te.size and d.trail_ne.size == d.trail_te.size:
            ok = np.isfinite(d.trail_ne) & np.isfinite(d.trail_te) & (d.trail_ne > 0) & (d.trail_te > 0)
            cv.dots(px(d.trail_ne[ok]), py(d.trail_te[ok]), _L_TRAIL)
        if d.point is not None and d.point[0] > 0 and d.point[1] > 0:
            xp, yp = float(px(d.point[0])), float(py(d.point[1]))
            xp = min(max(xp, 0.0), cv.px_width - 1.0)
            yp = min(max(yp, 0.0), cv.px_height - 1.0)
            col, row = cv.cell_of(xp, yp)
            cv.put(col, row, "✖" if outside else "◆", _L_POINT)
        return self._frame(cv, margin, x0, x1, y0, y1, outside)

    @staticmethod
    def _label(cv: BrailleCanvas, xs: np.ndarray, ys: np.ndarray, text: str, layer: int, low: bool = False) -> None:
        ok = np.flatnonzero((xs >= 0) & (xs < cv.px_width) & (ys >= 0) & (ys < cv.px_height))
        if ok.size == 0:
            return
        i = ok[len(ok) // 5] if low else ok[-1]
        col, row = cv.cell_of(float(xs[i]), float(ys[i]))
        col = min(max(col - len(text) // 2, 0), cv.width - len(text))
        row = min(row + (1 if row == 0 else 0), cv.height - 1)
        cv.put(col, row, text, layer)

    @staticmethod
    def _box(cv: BrailleCanvas, px: Callable[[float], np.ndarray], py: Callable[[float], np.ndarray],
             box: tuple[float | None, float | None, float | None, float | None]) -> None:
        lo_n, hi_n, lo_t, hi_t = box
        if all(v is None for v in box):
            return
        xa = float(px(lo_n)) if lo_n else -1.0
        xb = float(px(hi_n)) if hi_n else cv.px_width + 1.0
        ya = float(py(lo_t)) if lo_t else -1.0
        yb = float(py(hi_t)) if hi_t else cv.px_height + 1.0
        for x in (xa, xb):
            cv.line(x, max(ya, 0.0), x, min(yb, cv.px_height - 1.0), _L_BOX)
        for y in (ya, yb):
            cv.line(max(xa, 0.0), y, min(xb, cv.px_width - 1.0), y, _L_BOX)

    def _frame(self, cv: BrailleCanvas, margin: int, x0: float, x1: float, y0: float, y1: float,
               outside: bool) -> list[list[Segment]]:
        practical = self.data.system == "practical"
        n_shift = -6 if practical else 0
        rows = cv.lines(palette.FAINT)
        out: list[list[Segment]] = []
        label_rows: dict[int, str] = {}
        for e in range(int(y0), int(y1) + 1):
            r = (cv.px_height - 1 - int((e - y0) / (y1 - y0) * (cv.px_height - 1))) // 4
            if practical:
                label_rows[r] = _decade_label(e)
            else:
                label_rows[r] = f"{10.0 ** e * EV_IN_K:.1e}".replace("e+0", "e").replace("e+", "e")
        unit = "eV" if practical else "K"
        for r, row in enumerate(rows):
            lab = label_rows.get(r, "")
            out.append([Segment(lab.rjust(margin - 1)[: margin - 1] + "┤" if lab else " " * (margin - 1) + "│", palette.DIM)] + row)
        axis = [" "] * cv.width
        for e in range(int(x0), int(x1) + 1):
            col = int((e - x0) / (x1 - x0) * (cv.px_width - 1)) // 2
            text = f"1e{e + n_shift}"
            start = min(max(col - len(text) // 2, 0), cv.width - len(text))
            if all(c == " " for c in axis[max(0, start - 1): start + len(text) + 1]):
                axis[start: start + len(text)] = list(text)
        out.append([Segment(unit.rjust(margin - 1) + "└", palette.DIM), Segment("".join(axis), palette.DIM)])
        n_unit = "ne cm⁻³→" if practical else "ne m⁻³→"
        has_box = any(v is not None for v in self.data.box)
        state = "✖ OUTSIDE box" if outside else (
            ("◆now ∙trail □box" if has_box else "◆now ∙trail") if self.data.point else "no point yet")
        legend = f"{n_unit}  {state}"
        out.append([Segment(" " * margin + legend[: max(0, cv.width)], palette.ALERT if outside else palette.DIM)])
        return out
