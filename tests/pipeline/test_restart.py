"""One restart for every reason time starts over (Session.restart): a seek back, a source clock that goes
back, a publisher that restarts its numbering. Each test fails if that cause does not start the alarm
engine's timing over: a condition held across it must wait its whole on-delay again."""

from __future__ import annotations

import numpy as np
import pytest

from monitor.config import parse_config
from monitor.session import Session, make_engine
from pipeline_helpers import CollectSink, ListSource, make_batch

# no outside reference: every figure here is this test's own input (a limit at 2e17 m^-3 with a 1 s on-delay)
CONFIG = {"limit": [{"name": "dense", "quantity": "ne", "high": 2e17, "on_delay": 1.0, "priority": "high"}]}


def _held(t0: float, seconds: float, seq0: int | None = None):
    t = t0 + np.arange(int(round(seconds * 1000))) * 1e-3
    seq = None if seq0 is None else seq0 + np.arange(len(t))
    return make_batch(t, seq=seq, ne=np.full(len(t), 3e17), Te=3.0)


def _raised(collect: CollectSink) -> list[float]:
    return [e.time for e in collect.alarms if e.alarm == "dense" and e.state.value == "unacknowledged"]


def _run(session: Session) -> None:
    session.open()
    while session.step(0.0):
        pass


def test_a_clock_that_goes_back_starts_the_delay_over(collect: CollectSink) -> None:
    config = parse_config(CONFIG, None)
    s = Session(ListSource([_held(100.0, 0.6), _held(0.0, 1.2)]), config, [collect],
                engine=make_engine(config), live=False)
    _run(s)
    assert s.summary()["restarts"] == 1
    # the delay counts from the new clock's first sample: raised at t = 1.0 of the new clock
    assert _raised(collect) == [pytest.approx(1.0)]
    assert s.snapshot().trail_t.min() >= 0.0 and s.snapshot().trail_t.max() < 2.0   # the trail began afresh


def test_a_publisher_that_restarts_its_numbering_starts_the_delay_over(collect: CollectSink) -> None:
    config = parse_config(CONFIG, None)
    # seq 0..599 over 0.0-0.6 s, then a restarted publisher numbers from 0 again while time runs on
    s = Session(ListSource([_held(0.0, 0.6, seq0=0), _held(0.6, 1.2, seq0=0)]), config, [collect],
                engine=make_engine(config), live=False)
    _run(s)
    assert s.summary()["restarts"] == 1 and s.summary()["lost"] == 0
    # without the restart the held condition would have raised at 1.0 s; it waits its delay from 0.6 s
    assert _raised(collect) == [pytest.approx(1.6)]


class _Player(ListSource):
    """A replay source: the session may seek it (back, here)."""

    def pause(self) -> None: ...

    def resume(self) -> None: ...

    def step(self) -> None: ...

    def set_speed(self, speed: float | None) -> None: ...

    def seek(self, t: float) -> str:
        return "back"

    def position(self) -> tuple[float, float, float | None, float | None, bool]:
        return (0.0, 0.0, None, None, False)


def test_a_seek_back_starts_the_delay_over(collect: CollectSink) -> None:
    config = parse_config(CONFIG, None)
    player = _Player([_held(5.0, 0.6)], end=False)
    s = Session(player, config, [collect], engine=make_engine(config), live=False)
    s.open()
    s.step(0.0)
    assert s.seek(0.0)
    player.script.append(_held(0.0, 1.2))
    s.step(0.0)
    assert s.summary()["restarts"] == 0            # a seek is the operator's, not the source's restart
    assert _raised(collect) == [pytest.approx(1.0)]
    assert s.summary()["accepted"] == 1800         # the same times are accepted again after the seek
