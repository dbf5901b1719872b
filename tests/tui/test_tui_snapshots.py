"""SVG snapshots of the screen at fixed sizes from hand-built snapshots, a fixed seed and an injected clock."""

from __future__ import annotations

from monitor.alarms.events import AlarmState, Priority
from monitor.tui.app import RegimeApp
from monitor.tui.feed import FixedFeed

from tui_helpers import alarm, built_snapshot

ALARMS = (
    alarm(),
    alarm("Te_band", AlarmState.ACKNOWLEDGED, Priority.ADVISORY, quantity="Te", value=1.1, limit=1.2,
          since=20.0, predicted_time=33.0),
    alarm("over_cutoff", AlarmState.RETURNED_UNACKNOWLEDGED, Priority.HIGH, quantity="cutoff_ratio",
          value=0.9, limit=1.0, latched=True),
)


def _app(fixed_settings, **kw) -> RegimeApp:
    return RegimeApp(FixedFeed(built_snapshot(**kw)), fixed_settings)


def test_watch_80x24_with_alarms(snap_compare, fixed_settings) -> None:
    assert snap_compare(_app(fixed_settings, alarms=ALARMS), terminal_size=(80, 24))


def test_watch_80x24_stale_source(snap_compare, fixed_settings) -> None:
    assert snap_compare(_app(fixed_settings, stale=True), terminal_size=(80, 24))


def test_watch_160x50_replay_paused(snap_compare, fixed_settings) -> None:
    assert snap_compare(_app(fixed_settings, alarms=ALARMS, replay=True), terminal_size=(160, 50))


def test_watch_80x24_si_units(snap_compare, fixed_settings) -> None:
    assert snap_compare(_app(fixed_settings, alarms=ALARMS[:1]), press=["u"], terminal_size=(80, 24))


def test_help_80x24(snap_compare, fixed_settings) -> None:
    assert snap_compare(_app(fixed_settings), press=["question_mark"], terminal_size=(80, 24))


def test_watch_80x24_discharge_off(snap_compare, fixed_settings) -> None:
    from dataclasses import replace
    snap = replace(built_snapshot(alarms=(alarm("ne_high", AlarmState.SUPPRESSED),)), discharge_on=False)
    from monitor.tui.feed import FixedFeed as Fixed
    assert snap_compare(RegimeApp(Fixed(snap), fixed_settings), terminal_size=(80, 24))


def test_watch_80x24_derived(snap_compare, fixed_settings) -> None:
    assert snap_compare(_app(fixed_settings), press=["d"], terminal_size=(80, 24))
