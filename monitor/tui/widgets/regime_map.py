"""The regime map widget: the operating point and its trail on the ne-Te plane with the device's guides."""

from __future__ import annotations

import numpy as np
from rich.text import Text
from textual.app import RenderResult
from textual.reactive import reactive
from textual.widget import Widget

from monitor.snapshot import Snapshot
from monitor.tui import palette
from monitor.tui.renderables.regime_map import MapData, RegimeMap
from monitor.tui.settings import Box

__all__ = ["RegimeMapView"]

_EMPTY = np.empty(0)


class RegimeMapView(Widget):
    """Fills its region with :class:`RegimeMap`; device guides and box are fixed at construction."""

    DEFAULT_CSS = """
    RegimeMapView {
        height: 1fr;
        min-height: 8;
    }
    """

    snapshot: reactive[Snapshot | None] = reactive(None, always_update=True)
    """The snapshot whose latest point and trail are drawn."""

    units: reactive[str] = reactive("practical")
    """Axis labels in ``practical`` (cm^-3, eV) or ``SI`` (m^-3, K)."""

    def __init__(self, *, length: float | None = None, wave_frequency: float | None = None,
                 box: Box = (None, None, None, None), name: str | None = None, id: str | None = None,
                 classes: str | None = None) -> None:
        super().__init__(name=name, id=id, classes=classes)
        self._length = length
        self._wave_frequency = wave_frequency
        self._box = box

    def render(self) -> RenderResult:
        width, height = self.content_region.width or 40, self.content_region.height or 12
        if width < 20 or height < 6:
            return Text("map needs 20x6 cells", style=palette.DIM)
        snap = self.snapshot
        point = None
        trail_ne, trail_te = _EMPTY, _EMPTY
        if snap is not None:
            ne = snap.latest.get("ne", (float("nan"), None))[0]
            te = snap.latest.get("Te", (float("nan"), None))[0]
            if np.isfinite(ne) and np.isfinite(te) and ne > 0 and te > 0:
                point = (float(ne), float(te))
            trail_ne = snap.trail.get("ne", _EMPTY)
            trail_te = snap.trail.get("Te", _EMPTY)
            if trail_ne.size != trail_te.size:
                trail_ne, trail_te = _EMPTY, _EMPTY
        data = MapData(trail_ne=trail_ne, trail_te=trail_te, point=point, length=self._length,
                       wave_frequency=self._wave_frequency, box=self._box, system=self.units)
        return RegimeMap(data, width, height)
