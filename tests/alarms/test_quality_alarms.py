"""Data-quality diagnostics: one stale alarm and one bad-quality alarm per source, dated in data time."""

from __future__ import annotations

import numpy as np

from alarm_helpers import engine, frame, summary

DT = 0.01


def test_gap_inside_a_frame_raises_stale_when_it_began_plus_stale_after() -> None:
    eng = engine([], stale_after=2.0)
    t = np.concatenate((np.arange(0, 101) * DT, 5.0 + np.arange(0, 100) * DT))   # nothing from 1.0 to 5.0
    events = eng.process(frame(t))
    assert summary(events, "probe:stale") == [(3.0, "normal", "unacknowledged"),
                                              (5.0, "unacknowledged", "returned_unacknowledged")]
    assert events[-1].value == 4.0 and events[-1].limit == 2.0 and events[-1].kind == "stale"


def test_tick_raises_stale_dated_in_data_time_and_data_clears_it() -> None:
    eng = engine([], stale_after=2.0)
    eng.process(frame(np.arange(0, 101) * DT))
    assert eng.tick(2.5, "probe") == []
    (raised,) = eng.tick(3.5, "probe")
    assert (raised.alarm, raised.time, raised.state.value) == ("probe:stale", 3.0, "unacknowledged")
    assert eng.tick(4.0, "probe") == []          # raised once
    events = eng.process(frame([4.0, 4.01]))
    assert summary(events, "probe:stale") == [(4.0, "unacknowledged", "returned_unacknowledged")]


def test_a_source_that_never_sent_goes_stale_after_it_was_first_polled() -> None:
    eng = engine([], stale_after=2.0)
    assert eng.tick(10.0, "gauge") == []
    (raised,) = eng.tick(12.5, "gauge")
    assert raised.alarm == "gauge:stale" and raised.time == 12.0


def _reference_share(t: np.ndarray, bad: np.ndarray, window: float) -> np.ndarray:
    """Per-sample loop, the plain definition: invalid share over (t_i - window, t_i]."""
    out = np.empty(len(t))
    for i in range(len(t)):
        inside = (t > t[i] - window) & (t <= t[i])
        out[i] = bad[inside].sum() / inside.sum()
    return out


def test_bad_quality_alarm_follows_the_invalid_share_over_the_window() -> None:
    opts = {"quality_window": 1.0, "quality_above": 0.2, "quality_below": 0.1, "quality_min_samples": 20}
    t = np.arange(0, 600) * DT
    bad = (t >= 2.0 - 1e-9) & (t < 3.0 - 1e-9)
    eng = engine([], opts)
    events = eng.process(frame(t, valid=~bad))
    got = summary(events, "probe:quality")
    share = _reference_share(t, bad, 1.0)
    up = t[np.argmax(share > 0.2)]
    down = t[np.flatnonzero((share < 0.1) & (t > up))[0]]
    assert got == [(round(up, 6), "normal", "unacknowledged"),
                   (round(down, 6), "unacknowledged", "returned_unacknowledged")]
    assert abs(up - 2.20) < 0.011 and abs(down - 3.90) < 0.011   # 21st bad sample of 100; 9 left of 100


def test_quality_needs_enough_samples_in_the_window() -> None:
    eng = engine([], {"quality_min_samples": 20})
    events = eng.process(frame(np.arange(10) * 0.2, valid=np.zeros(10, dtype=bool)))   # 5 per window
    assert summary(events, "probe:quality") == []


def test_limits_ignore_invalid_samples_while_quality_alarm_reports_them() -> None:
    t = np.arange(0, 300) * DT
    bad = t >= 1.0
    eng = engine([{"name": "hot", "quantity": "Te", "high": 5.0}])
    events = eng.process(frame(t, valid=~bad, Te=np.where(bad, 99.0, 3.0)))
    assert [e.alarm for e in events if e.state.value == "unacknowledged"] == ["probe:quality"]


def test_each_source_has_its_own_diagnostics() -> None:
    eng = engine([], stale_after=1.0)
    eng.process(frame([0.0, 0.5], source="a"))
    eng.process(frame([0.0, 0.5], source="b"))
    eng.process(frame([0.6, 3.0], source="a"))
    states = {v.alarm: v.state.value for v in eng.views()}
    assert states["a:stale"] == "returned_unacknowledged" and states["b:stale"] == "normal"
    assert {"a:quality", "b:quality"} <= set(states)
