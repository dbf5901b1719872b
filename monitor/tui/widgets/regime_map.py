"""The regime map widget: the operating point and its fading trail on the ne-Te plane over a background drawn once per size."""

from __future__ import annotations

import numpy as np
from rich.segment import Segment
from rich.style import Style
from textual.geometry import Region, Size
from textual.reactive import reactive
from textual.strip import Strip
from textual.widget import Widget

from monitor.alarms.events import AlarmState
from monitor.snapshot import Snapshot
from monitor.tui import feed
from monitor.tui.formatting import fmt_age
from monitor.tui.renderables.braille import segment_rows
from monitor.tui.renderables.map_view import View, choose_view
from monitor.tui.renderables.regime_map import STYLES, Guides, MapBackground, MapData, frame_cells
from monitor.tui.settings import Box

__all__ = ["RegimeMapView", "map_data"]

_EMPTY = np.empty(0)


def map_data(snap: Snapshot | None, *, guides: Guides, now: float, stale_after: float) -> MapData:
    """What the map draws from a snapshot: the point (ne, Te now), the trail, whether the envelope is
    judged (a discharge is on) and, when the inputs are stale, the point's age in words."""
    point = None
    trail_ne, trail_te = _EMPTY, _EMPTY
    judged, stale_age = True, None
    if snap is not None:
        ne = snap.latest.get("ne", (float("nan"), None))[0]
        te = snap.latest.get("Te", (float("nan"), None))[0]
        if np.isfinite(ne) and np.isfinite(te) and ne > 0 and te > 0:
            point = (float(ne), float(te))
        trail_ne = snap.trail.get("ne", _EMPTY)
        trail_te = snap.trail.get("Te", _EMPTY)
        if trail_ne.size != trail_te.size:
            trail_ne, trail_te = _EMPTY, _EMPTY
        # judged as the engine judges: a discharge on and the envelope's limits not suppressed by design
        suppressed = any(a.state == AlarmState.SUPPRESSED for a in snap.alarms
                         if a.kind == "limit" and a.quantity in ("ne", "Te"))
        judged = feed.discharge_state(snap, now, stale_after) == "on" and not suppressed
        quality = feed.value_quality(snap, "ne", now, stale_after)
        if quality.stale:
            stale_age = fmt_age(quality.age)
    return MapData(trail_ne=trail_ne, trail_te=trail_te, point=point, length=guides.length,
                   wave_frequency=guides.wave_frequency, box=guides.box, system=guides.system, judged=judged,
                   stale_age=stale_age)


class RegimeMapView(Widget):
    """Fills its region with the map. The background (guides, labels, envelope, axes) is cached per size,
    view and unit choice; a frame overlays the trail and the point, and repaints only when a cell changed."""

    DEFAULT_CSS = """
    RegimeMapView {
        height: 1fr;
        min-height: 8;
    }
    """

    snapshot: reactive[Snapshot | None] = reactive(None, always_update=True, repaint=False)
    """The snapshot whose latest point and trail are drawn."""

    units: reactive[str] = reactive("practical", repaint=False)
    """Axis labels in ``practical`` (cm^-3, eV) or ``SI`` (m^-3, K)."""

    def __init__(self, *, length: float | None = None, wave_frequency: float | None = None,
                 box: Box = (None, None, None, None), stale_after: float = 2.0, name: str | None = None,
                 id: str | None = None, classes: str | None = None) -> None:
        super().__init__(name=name, id=id, classes=classes)
        self._length = length
        self._wave_frequency = wave_frequency
        self._box = box
        self.stale_after = stale_after
        self.now = 0.0
        self._view: View | None = None
        self._bg: MapBackground | None = None
        self._cells: tuple[np.ndarray, np.ndarray] | None = None
        self._strips: list[Strip] = []
        self._styles: tuple[Style | None, list[Style | None]] = (None, [])
        self.frames = 0
        """Frames composed (the benchmark and tests read it)."""

    @property
    def guides(self) -> Guides:
        return Guides(self._length, self._wave_frequency, self._box, self.units)

    def watch_snapshot(self) -> None:
        self._update()

    def watch_units(self) -> None:
        self._update()

    def on_resize(self) -> None:
        self._update()

    def _background(self, data: MapData, size: Size) -> MapBackground:
        view = choose_view(self._box, data.trail_ne, data.trail_te, self._view)
        bg = self._bg
        if bg is None or bg.view != view or bg.guides != self.guides or (bg.width, bg.height) != tuple(size):
            bg = MapBackground(self.guides, view, size.width, size.height)
            self._bg, self._view = bg, view
        return bg

    def _update(self) -> None:
        """Compose the frame; repaint only when a cell or the size changed."""
        size = self.content_region.size
        if size.width < 20 or size.height < 6:
            if self._cells is not None or not self._strips:
                self._cells = None
                text = "map needs 20x6 cells"[: max(0, size.width)]
                self._strips = [Strip([Segment(text, self._style_table()[2])], len(text))]
                self.refresh()
            return
        data = map_data(self.snapshot, guides=self.guides, now=self.now, stale_after=self.stale_after)
        bg = self._background(data, size)
        codes, style = frame_cells(bg, data)
        self.frames += 1
        old = self._cells
        table = self._style_table()
        if old is not None and old[0].shape == codes.shape and len(self._strips) == codes.shape[0]:
            # only the rows whose cells changed are rebuilt and repainted (the trail and the point
            # touch a few rows; the rest stays as painted)
            changed = np.flatnonzero((old[0] != codes).any(axis=1) | (old[1] != style).any(axis=1))
            if changed.size == 0:
                return
            self._cells = (codes, style)
            rows = segment_rows(codes[changed], style[changed], table)
            strips = list(self._strips)
            for r, row in zip(changed.tolist(), rows):
                strips[r] = Strip(row, size.width)
            self._strips = strips
            # repaint only those rows (a region in content cells: Textual adds the border and padding)
            top, bottom = int(changed[0]), int(changed[-1])
            self.refresh(Region(0, top, size.width, bottom - top + 1))
            return
        self._cells = (codes, style)
        self._strips = [Strip(row, size.width) for row in segment_rows(codes, style, table)]
        self.refresh()

    def _style_table(self) -> list[Style | None]:
        base = self.rich_style
        if self._styles[0] != base:
            self._styles = (base, [base if s is None else base + s for s in STYLES])
        return self._styles[1]

    def render_line(self, y: int) -> Strip:
        if 0 <= y < len(self._strips):
            return self._strips[y]
        return Strip.blank(self.size.width, self.rich_style)
