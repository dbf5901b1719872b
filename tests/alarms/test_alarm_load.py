"""Operator-load figures in data time: alarms per 10 minutes, flood with hysteresis, chattering; and seeking."""

from __future__ import annotations

import numpy as np

from alarm_helpers import engine, frame
from monitor.alarms.events import AlarmEvent, AlarmState, Priority
from monitor.alarms.load import LoadTracker, is_activation


def _activation(t: float, alarm: str = "a") -> AlarmEvent:
    return AlarmEvent(time=t, wall=0.0, alarm=alarm, state=AlarmState.UNACKNOWLEDGED, previous=AlarmState.NORMAL,
                      quantity=None, value=None, limit=None, priority=Priority.HIGH)


# The thresholds (a flood is more than 10 alarms in 10 minutes per operator, over below 5; chattering
# is 3 or more activations of one alarm within 60 s) are the figures of ANSI/ISA-18.2 and its
# technical report on alarm-system monitoring, as the project's issue states them (from memory).
def test_flood_starts_above_ten_in_ten_minutes_and_ends_below_five() -> None:
    load = LoadTracker()
    load.record([_activation(10.0 * i, f"a{i}") for i in range(10)])      # 10 in 90 s: not yet a flood
    assert load.load().alarms_per_window == 10 and not load.load().flood
    load.record([_activation(100.0, "a10")])                             # the 11th
    assert load.load().flood
    load.advance(650.0)                       # window (50, 650]: the five at 60..100 s still count
    assert load.load().alarms_per_window == 5 and load.load().flood
    load.advance(661.0)                       # (61, 661]: four left, fewer than 5: flood over
    assert load.load().alarms_per_window == 4 and not load.load().flood


def test_chattering_is_three_activations_of_one_alarm_within_a_minute() -> None:
    load = LoadTracker()
    load.record([_activation(0.0, "x"), _activation(30.0, "x"), _activation(35.0, "y")])
    assert load.load().chattering == ()
    load.record([_activation(59.0, "x")])
    assert load.load().chattering == ("x",)
    load.advance(61.0)                         # the one at 0 s has left the minute
    assert load.load().chattering == ()


def test_operator_actions_and_returns_are_not_activations() -> None:
    e = _activation(1.0)
    assert is_activation(e)
    ack = AlarmEvent(1.0, 0.0, "a", AlarmState.UNACKNOWLEDGED, AlarmState.UNACKNOWLEDGED, None, None, None,
                     Priority.HIGH, action="reset_refused")
    assert not is_activation(ack)


def test_engine_reports_a_chattering_alarm_from_the_data() -> None:
    eng = engine([{"name": "hot", "quantity": "Te", "high": 5.0}])
    t = np.arange(0, 6000) * 0.01                                        # 60 s
    te = np.where((t % 10.0) < 1.0, 9.0, 3.0)                            # over the limit 1 s in every 10 s
    eng.process(frame(t, Te=te))
    count, flood, chattering = eng.load()
    assert count == 6 and chattering == ("hot",) and not flood


def test_seek_back_keeps_states_and_starts_timing_over() -> None:
    eng = engine([{"name": "hot", "quantity": "Te", "high": 5.0, "on_delay": 0.5}], stale_after=2.0)
    t = np.arange(0, 300) * 0.01
    eng.process(frame(t + 100.0, Te=np.where(t > 1.0, 9.0, 3.0)))
    assert eng.state("hot") == AlarmState.UNACKNOWLEDGED
    eng.on_seek(0.0)
    events = eng.process(frame(t, Te=np.full(len(t), 3.0)))
    assert [e.alarm for e in events if e.kind == "stale"] == []         # going back in time is not a gap
    assert eng.state("hot") == AlarmState.RETURNED_UNACKNOWLEDGED
