"""The regime map's legend: what the point says now, then what each mark and line means; whole items dropped, never cut."""

from __future__ import annotations

from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from monitor.tui.renderables.regime_map import MapData

__all__ = ["legend_rows", "LegendItem"]

LegendItem = tuple[str, int]   # text, style index of monitor.tui.renderables.regime_map.STYLES

# style indices (as in regime_map; repeated here to keep this module free of drawing code)
_FAINT, _DIM, _LABEL, _DEBYE, _ND, _CUT, _BOX, _OLD, _MID, _NEW, _POINT, _ALERT = 1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12


def _state(data: MapData, outside: bool, off_map: bool) -> list[list[LegendItem]]:
    if data.point is None:
        return [[("no point yet (needs ne and Te)", _DIM)]]
    if data.stale_age is not None:
        return [[("◇", _DIM), (f" last point, STALE {data.stale_age}", _DIM)]]
    where = " (off the map: arrow at the edge)" if off_map else ""
    if outside and data.judged:
        return [[("✖", _ALERT), (" OUTSIDE the envelope" + where, _ALERT)]]
    if outside:   # a discharge off or the limits suppressed by design: said in words, no alarm colour
        return [[("◆", _POINT), (" now outside, not judged" + where, _LABEL)],
                [("(no discharge or suppressed by design)", _DIM)]]
    return [[("◆", _POINT), (" now" + where, _LABEL)]]


def _marks(data: MapData, beyond: bool) -> list[list[LegendItem]]:
    items: list[list[LegendItem]] = [[("⠂", _OLD), ("⠂", _MID), ("⠂", _NEW), (" trail, older fainter", _DIM)]]
    if any(b is not None for b in data.box):
        items.append([("⡇", _BOX), (" envelope", _DIM)])
    if beyond:
        items.append([("◀", _DIM), (" data beyond the view", _DIM)])
    return items


def _guides(data: MapData) -> list[list[LegendItem]]:
    items: list[list[LegendItem]] = []
    if data.length:
        items.append([("⠒⠒", _DEBYE), (" λD: Debye length", _DIM)])
    items.append([("⠂ ⠂", _ND), (" ND: per Debye sphere", _DIM)])
    if data.wave_frequency:
        items.append([("⡆", _CUT), (" cutoff", _DIM)])
    return items


def _fill(items: list[list[LegendItem]], width: int, gap: int = 2) -> tuple[list[LegendItem], list[list[LegendItem]]]:
    """As many whole items as fit in ``width`` (the first always, cut only if it alone is too long)."""
    row: list[LegendItem] = []
    used = 0
    rest = list(items)
    while rest:
        item = rest[0]
        n = sum(len(t) for t, _s in item) + (gap if row else 0)
        if row and used + n > width:
            break
        if row:
            row.append((" " * gap, 0))
        row.extend(item)
        used += n
        rest.pop(0)
    return row, rest


def legend_rows(data: MapData, *, outside: bool, off_map: bool, width: int, rows: int,
                beyond: bool = False) -> list[list[LegendItem]]:
    """``rows`` rows (1 or 2) of legend items that fit ``width`` cells; ``beyond``: some data lie beyond the view."""
    first = _state(data, outside, off_map) + _marks(data, beyond or off_map)
    if rows <= 1:
        row, _rest = _fill(first + _guides(data), width)
        return [row]
    row1, _r1 = _fill(first, width)
    row2, _r2 = _fill(_guides(data), width)
    return [row1, row2]
