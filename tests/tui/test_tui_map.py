"""The regime map reads at a glance: named guides in distinct styles, a legend, a point larger than the grid,
a view anchored on the envelope that outliers cannot rescale, no alarm colour while nothing is judged, and a
background drawn once per size and unit choice."""

from __future__ import annotations

import numpy as np

from monitor.alarms.events import AlarmState
from monitor.tui import palette
from monitor.tui.app import RegimeApp
from monitor.tui.feed import FixedFeed
from monitor.tui.renderables.braille import BRAILLE_BASE
from monitor.tui.renderables.map_view import View, choose_view
from monitor.tui.renderables.regime_map import (S_ALERT, S_DEBYE, S_ND, STYLES, Guides, MapBackground, MapData,
                                                RegimeMap, frame_cells)
from monitor.tui.widgets.regime_map import RegimeMapView

from tui_helpers import alarm, built_snapshot, text_of, wait_for

BOX = (1e16, 2.5e17, 1.0, 8.0)


def _data(**kw: object) -> MapData:
    t = np.linspace(0, 6, 400)
    base = dict(trail_ne=5e16 * (1 + 0.2 * np.sin(t)), trail_te=3.0 + 0.2 * np.cos(t), point=(5e16, 3.0),
                length=0.3, wave_frequency=2.45e9, box=BOX)
    base.update(kw)
    return MapData(**base)  # type: ignore[arg-type]


def _text(data: MapData, w: int = 70, h: int = 24) -> str:
    return "\n".join("".join(s.text for s in row) for row in RegimeMap(data, w, h).build(w, h))


def test_guides_are_named_for_what_they_are_with_a_legend() -> None:
    text = _text(_data())
    assert "λD=L/100" in text or "λD=L/1e3" in text          # the Debye-length lines say lambda_D = L/10^k
    assert "ND=1e3" in text or "ND=1e6" in text               # the N_D lines say N_D
    assert "cutoff 2.45 GHz" in text                          # the cutoff line is named with its frequency
    assert "λD: Debye length" in text and "ND: per Debye sphere" in text and "envelope" in text


def test_debye_and_nd_families_are_drawn_in_distinct_styles_and_densities() -> None:
    d = _data()
    bg = MapBackground(d.guides, choose_view(d.box, d.trail_ne, d.trail_te), 70, 24)
    assert STYLES[S_DEBYE] != STYLES[S_ND]
    bits = bg.plot_bits.astype(np.uint8)
    ones = np.unpackbits(bits[..., None], axis=-1).sum(axis=-1)
    plot = bg.style[:bg.plot_h, bg.margin:bg.margin + bg.plot_w]
    debye, nd = ones[plot == S_DEBYE], ones[plot == S_ND]
    assert debye.size and nd.size
    assert debye.mean() > 1.5 * nd.mean()     # solid lines fill their cells, dotted ones leave gaps


def test_point_is_larger_than_the_grid_a_clear_halo_around_it() -> None:
    d = _data()
    bg = MapBackground(d.guides, choose_view(d.box, d.trail_ne, d.trail_te), 70, 24)
    codes, _style = frame_cells(bg, d)
    rows, cols = np.nonzero(codes[:bg.plot_h] == ord("◆"))     # in the plot (the legend has one too)
    assert rows.size == 1
    r, c = int(rows[0]), int(cols[0])
    around = codes[max(0, r - 1):r + 2, max(bg.margin, c - 1):c + 2]
    braille = (around >= BRAILLE_BASE) & (around < BRAILLE_BASE + 256)
    assert not braille.any()                  # no guide or trail dot touches the point


def test_trail_fades_older_points_fainter() -> None:
    d = _data(point=None)
    bg = MapBackground(d.guides, choose_view(d.box, d.trail_ne, d.trail_te), 70, 24)
    _codes, style = frame_cells(bg, d)
    used = set(np.unique(style).tolist())
    from monitor.tui.renderables.regime_map import S_MID, S_NEW, S_OLD
    assert {S_OLD, S_MID, S_NEW} <= used
    assert STYLES[S_OLD] != STYLES[S_NEW]


def test_outliers_do_not_rescale_the_view_and_show_as_edge_arrows() -> None:
    n = 1000
    te = np.full(n, 3.0)
    te[::100] = 4.0e4                           # 1 % of accepted readings far off (one scenario's Te spikes)
    ne = np.full(n, 5e16)
    view = choose_view(BOX, ne, te)
    assert view.y1 <= 2.0                        # the view stays on the envelope: up to 100 eV
    text = _text(_data(trail_ne=ne, trail_te=te))
    assert "▲" in text and "data beyond the view" in text


def test_view_is_anchored_on_the_envelope_and_does_not_jump() -> None:
    v = choose_view(BOX, np.array([5e16]), np.array([3.0]))
    assert v.x0 <= np.log10(BOX[0]) and v.x1 >= np.log10(BOX[1])
    assert v.y0 <= np.log10(BOX[2]) and v.y1 >= np.log10(BOX[3])
    # a small wobble keeps the previous view
    assert choose_view(BOX, np.array([6e16]), np.array([3.3]), v) is v
    assert isinstance(v, View)


def test_no_alarm_colour_outside_the_box_while_nothing_is_judged() -> None:
    outside = (3e17, 2.2)
    judged = _data(point=outside, trail_ne=np.array([3e17]), trail_te=np.array([2.2]))
    quiet = _data(point=outside, trail_ne=np.array([3e17]), trail_te=np.array([2.2]), judged=False)
    assert "OUTSIDE" in _text(judged)
    text = _text(quiet)
    assert "OUTSIDE" not in text and "✖" not in text and "not judged" in text
    bg = MapBackground(quiet.guides, choose_view(quiet.box, quiet.trail_ne, quiet.trail_te), 70, 24)
    assert not (frame_cells(bg, quiet)[1] == S_ALERT).any()
    assert (frame_cells(bg, judged)[1] == S_ALERT).any()
    assert STYLES[S_ALERT] == palette.ALERT


def test_stale_point_is_hollow_with_its_age_in_words() -> None:
    text = _text(_data(stale_age="12 s"))
    assert "◇" in text and "◆" not in text and "STALE 12 s" in text


async def test_background_is_drawn_once_per_size_and_units(fixed_settings) -> None:
    app = RegimeApp(FixedFeed(built_snapshot()), fixed_settings)
    async with app.run_test(size=(160, 50)) as pilot:
        the_map = app.watch_screen.query_one(RegimeMapView)
        await wait_for(pilot, lambda: the_map.frames >= 3)
        first, strips = the_map._bg, the_map._strips
        frames = the_map.frames
        await wait_for(pilot, lambda: the_map.frames >= frames + 3)
        assert the_map._bg is first               # the same background, frame after frame
        assert the_map._strips is strips         # nothing moved: nothing repainted
        await pilot.press("u")
        await wait_for(pilot, lambda: the_map._bg is not first)
        assert the_map._bg is not None and the_map._bg.guides.system == "SI"
        assert "ne m⁻³" in text_of(the_map) or "m⁻³" in "".join(s.text for s in the_map._strips[-3])


async def test_suppressed_envelope_is_not_judged_on_the_screen(fixed_settings) -> None:
    snap = built_snapshot(alarms=(alarm("ne_high", AlarmState.SUPPRESSED),))
    outside = {**snap.latest, "ne": (3e17, None)}
    from dataclasses import replace
    app = RegimeApp(FixedFeed(replace(snap, latest=outside)), fixed_settings)
    async with app.run_test(size=(160, 50)) as pilot:
        the_map = app.watch_screen.query_one(RegimeMapView)
        await wait_for(pilot, lambda: the_map.frames >= 1 and bool(the_map._strips))
        text = "\n".join("".join(s.text for s in strip) for strip in the_map._strips)
        assert "not judged" in text and "OUTSIDE" not in text


async def test_help_explains_the_map(fixed_settings) -> None:
    app = RegimeApp(FixedFeed(built_snapshot()), fixed_settings)
    async with app.run_test(size=(100, 40)) as pilot:
        await pilot.press("question_mark")
        await wait_for(pilot, lambda: app.screen is not app.watch_screen)
        help_text = str(app.screen.query_one("#map-help").render())
        for words in ("Debye length", "ND", "cutoff", "envelope", "fades", "beyond the view", "not judged"):
            assert words in help_text


async def test_a_moved_point_is_painted_with_no_stale_row(fixed_settings) -> None:
    from dataclasses import replace

    from textual.geometry import Region
    snap = built_snapshot()
    feed = FixedFeed(snap)
    app = RegimeApp(feed, fixed_settings)
    async with app.run_test(size=(160, 50)) as pilot:
        the_map = app.watch_screen.query_one(RegimeMapView)
        await wait_for(pilot, lambda: the_map.frames >= 2)
        before = list(the_map._strips)
        moved = replace(snap, latest={**snap.latest, "ne": (1.2e17, None), "Te": (5.0, None)})
        feed._snapshot = moved                       # the next frames draw the moved point
        await wait_for(pilot, lambda: the_map._strips != before)
        await pilot.pause(0.2)
        assert any(a is b for a, b in zip(before, the_map._strips))       # unchanged rows kept as they were
        # what would be painted now equals the frame's rows, line for line (no stale row left behind)
        w, h = the_map.outer_size
        painted = the_map.render_lines(Region(0, 0, w, h))
        top, left = the_map.gutter.top, the_map.gutter.left
        for y, strip in enumerate(the_map._strips):
            want = "".join(seg.text for seg in strip)
            got = "".join(seg.text for seg in painted[top + y])[left:left + len(want)]
            assert got == want, f"row {y} painted stale"
