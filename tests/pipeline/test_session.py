"""Session: source -> pipeline -> alarm engine -> sinks, snapshots from another thread, source failure policy.

Every number compared here is the test's own input (counts, times, a constant density); no outside
physical value is checked in this module.
"""

# No outside reference in this file: every number compared is this test's own input (readings it sends,
# limits it sets); the units are the project's canonical ones (common practice: SI, temperatures in eV).

from __future__ import annotations

import threading
import time

import numpy as np
import pytest

from adapters.base import FatalSourceError, LinkState, TransientSourceError
from adapters.batch import Rejection
from monitor.config import Config, parse_config
from monitor.session import Session, make_engine
from pipeline_helpers import CollectSink, ListSource, make_batch


def steady(t0: float, n: int = 1000, ne: float = 1e17, seq0: int | None = None, **extra):
    t = t0 + np.arange(n) * 1e-3
    te = np.full(n, np.nan)
    te[::50] = 3.0
    seq = None if seq0 is None else seq0 + np.arange(n)
    return make_batch(t, seq=seq, ne=np.full(n, ne), Te=te, **extra)


def drive(session: Session, limit: int = 1000) -> None:
    for _ in range(limit):
        if not session.step(0.01):
            return
    raise AssertionError("the session did not end")


def test_frames_rejections_and_counts_reach_the_sinks(collect: CollectSink) -> None:
    bad = steady(1.0, 10, seq0=1000)
    bad.columns["ne"][3] = -5.0
    src = ListSource([steady(0.0, seq0=0), Rejection("probe", "malformed", b"ne=??", 0.0), bad])
    s = Session(src, Config(), [collect], live=False)
    drive(s)
    assert s.ended and s.failure is None
    assert [len(f) for f in collect.frames] == [1000, 9]
    assert [r.reason for r in collect.rejections] == ["malformed", "ne_not_positive"]
    assert collect.rejections[1].raw.startswith(b"t=1.003 seq=1003 ne=-5.0")
    summary = s.summary()
    assert summary["accepted"] == 1009
    assert summary["rejected"] == {"malformed": 1, "ne_not_positive": 1}
    assert summary["lost"] == 0      # 1000 follows 999
    assert summary["state"] == "ended"
    assert [st.state for st in collect.statuses][-1] is LinkState.ENDED
    s.close()
    assert collect.closed and src.closed.is_set()


def test_snapshot_latest_trails_stats_and_discharge() -> None:
    src = ListSource([steady(0.0, 3000)])
    s = Session(src, parse_config({"device": {"length": 0.3}}, None), live=False)
    drive(s)
    snap = s.snapshot()
    assert snap.data_time == pytest.approx(2.999)
    assert snap.latest["ne"] == (1e17, None)
    assert np.isfinite(snap.latest["debye_length"][0])
    assert snap.stats["ne"].n == 3000 and snap.stats["ne"].mean == pytest.approx(1e17)
    assert set(snap.trail) >= {"ne", "Te", "debye_length"}
    assert 20 <= len(snap.trail_t) <= 600 and np.all(np.diff(snap.trail_t) > 0)
    assert snap.discharge_on and not snap.live
    assert snap.counts["probe"].accepted == 3000
    assert snap.sources["probe"].state is LinkState.ENDED


def test_transient_error_is_a_status_and_the_session_goes_on(collect: CollectSink) -> None:
    src = ListSource([steady(0.0, 100), TransientSourceError("cable pulled"), steady(0.2, 100)])
    s = Session(src, Config(), [collect], live=False)
    drive(s)
    states = [st.state for st in collect.statuses]
    assert LinkState.DISCONNECTED in states and states[-1] is LinkState.ENDED
    assert any("cable pulled" in st.message for st in collect.statuses)
    assert s.failure is None and s.summary()["accepted"] == 200


def test_fatal_error_ends_with_a_failure(collect: CollectSink) -> None:
    src = ListSource([steady(0.0, 100), FatalSourceError("key file missing")])
    s = Session(src, Config(), [collect], live=False)
    drive(s)
    assert s.failure == "key file missing"
    assert s.summary()["failure"] == "key file missing" and s.summary()["accepted"] == 100
    assert collect.statuses[-1].state is LinkState.FAILED


def test_a_failing_sink_does_not_stop_the_session(collect: CollectSink) -> None:
    class Broken:
        def on_frame(self, frame) -> None:
            raise OSError("disk full")

    s = Session(ListSource([steady(0.0, 10), steady(0.1, 10)]), Config(), [Broken(), collect], live=False)
    drive(s)
    assert len(collect.frames) == 2 and s.sink_errors == 2


def test_snapshots_from_another_thread_while_running() -> None:
    batches = [steady(k * 0.1, 100, seq0=k * 100) for k in range(200)]
    s = Session(ListSource(batches), Config(), live=False)
    stop = threading.Event()
    worker = threading.Thread(target=s.run, kwargs={"stop": stop})
    worker.start()
    seen = []
    deadline = time.monotonic() + 30
    while worker.is_alive() and time.monotonic() < deadline:
        snap = s.snapshot()
        c = snap.counts.get("probe")
        if c is not None:
            seen.append(c.accepted)
            assert len(snap.trail_t) == len(snap.trail["ne"])
    worker.join(10)
    assert not worker.is_alive()
    assert seen == sorted(seen)             # counts only grow
    assert s.summary()["accepted"] == 20000


LIMITS = {
    "device": {"length": 0.3},
    "limit": [{"name": "dense", "quantity": "ne", "high": 2e17, "priority": "high"}],
}


def test_alarm_engine_events_and_operator_actions(collect: CollectSink) -> None:
    config = parse_config(LIMITS, None)
    engine = make_engine(config)
    src = ListSource([steady(0.0, 500), steady(0.5, 500, ne=3e17), steady(1.0, 500)])
    s = Session(src, config, [collect], engine=engine, live=False)
    drive(s)
    # the first event takes the limit out of suppression when the discharge is seen on
    dense = [e for e in collect.alarms if e.alarm == "dense" and e.previous.value != "suppressed"]
    assert [e.state.value for e in dense] == ["unacknowledged", "returned_unacknowledged"]
    assert dense[0].time == pytest.approx(0.5)
    assert dense[1].time == pytest.approx(1.0)
    views = {v.alarm: v for v in s.snapshot().alarms}
    assert views["dense"].state.value == "returned_unacknowledged"
    events = s.acknowledge("dense")
    assert [e.state.value for e in events] == ["normal"] and events[0].action == "acknowledge"
    assert collect.alarms[-1] is events[0]
    with pytest.raises(KeyError):
        s.acknowledge("no-such-alarm")
    assert s.summary()["alarm_events"] == len(collect.alarms)


def test_live_clock_raises_stale_when_the_source_goes_quiet(collect: CollectSink) -> None:
    config = parse_config({"sources": {"stale_after": 2.0}}, None)
    engine = make_engine(config)
    wall = [1000.0]
    src = ListSource([steady(50.0, 100)], end=False)
    s = Session(src, config, [collect], engine=engine, live=True, wall=lambda: wall[0])
    s.open()
    s.step(0.01)
    assert s.now() == pytest.approx(50.099)
    wall[0] += 1.0
    s.step(0.01)
    assert not [e for e in collect.alarms if "stale" in e.alarm]
    wall[0] += 1.5                   # 2.5 s of silence in data time
    s.step(0.01)
    stale = [e for e in collect.alarms if "stale" in e.alarm]
    assert stale and stale[0].state.value == "unacknowledged"
    assert stale[0].time == pytest.approx(52.099)     # dated when the data stopped + stale_after


def test_replay_controls_are_forwarded_when_the_source_has_them() -> None:
    class Player(ListSource):
        def __init__(self) -> None:
            super().__init__([steady(0.0, 10)])
            self.calls = []

        def pause(self) -> None:
            self.calls.append("pause")

        def resume(self) -> None:
            self.calls.append("resume")

        def step(self) -> None:
            self.calls.append("step")

        def set_speed(self, speed: float | None) -> None:
            self.calls.append(("speed", speed))

        def seek(self, t: float) -> None:
            self.calls.append(("seek", t))

        def position(self):
            return (1.5, 0.0, 10.0, None, True)

    plain = Session(ListSource([]), Config(), live=False)
    assert not plain.pause() and plain.replay_position() is None and not plain.can_replay
    p = Player()
    s = Session(p, Config(), live=False)
    drive(s)
    assert s.pause() and s.seek(0.0)
    assert p.calls == ["pause", ("seek", 0.0)]
    pos = s.replay_position()
    assert (pos.time, pos.end, pos.speed, pos.paused) == (1.5, 10.0, None, True)
    assert s.snapshot().replay == pos
    # after a seek the same times are accepted again
    s.pipeline.process(steady(0.0, 10))
    assert s.summary()["rejected"] == {}


def test_a_source_that_never_speaks_goes_stale(collect: CollectSink) -> None:
    config = parse_config({"sources": {"stale_after": 2.0}}, None)
    engine = make_engine(config)
    wall = [5000.0]
    s = Session(ListSource([], end=False), config, [collect], engine=engine, live=True, wall=lambda: wall[0])
    s.open()
    s.step(0.01)
    assert not collect.alarms
    wall[0] += 2.5
    s.step(0.01)
    stale = [e for e in collect.alarms if "stale" in e.alarm]
    assert [e.state.value for e in stale] == ["unacknowledged"]
    assert s.snapshot().data_time is None
    # the first reading clears it
    s.source.script.append(steady(wall[0], 10))
    s.step(0.01)
    stale = [e for e in collect.alarms if "stale" in e.alarm]
    assert stale[-1].state.value in ("returned_unacknowledged", "normal")


def test_a_fault_in_processing_refuses_the_batch_loudly(collect: CollectSink, capsys) -> None:
    calls = []

    def broken_derive(inputs, device, sigma=None):
        calls.append(1)
        if len(calls) == 2:
            raise FloatingPointError("synthetic fault")
        from monitor.physics import derive
        return derive(inputs, device, sigma)

    from monitor.pipeline import Pipeline
    pipe = Pipeline(Config(), derive=broken_derive)
    bad = steady(0.1, 10)
    bad.columns["ne"][4] = -1.0            # refused by validation, then by the fault: counted once
    src = ListSource([steady(0.0, 10), bad, steady(0.2, 10)])
    s = Session(src, Config(), [collect], live=False, pipeline=pipe)
    drive(s)
    summary = s.summary()
    assert summary["accepted"] == 20              # the second batch is refused, not counted twice
    assert summary["rejected"] == {"internal_error": 10}
    assert summary["internal_errors"] == 1
    assert len([r for r in collect.rejections if r.reason == "internal_error"]) == 10
    assert "synthetic fault" in capsys.readouterr().err


def test_an_open_that_fails_for_now_is_retried(collect: CollectSink) -> None:
    class Flaky(ListSource):
        def __init__(self) -> None:
            super().__init__([steady(0.0, 10)])
            self.attempts = 0

        def open(self) -> None:
            self.attempts += 1
            if self.attempts < 3:
                raise TransientSourceError("port busy")
            super().open()

    src = Flaky()
    s = Session(src, Config(), [collect], live=False)
    assert not s.open()
    deadline = time.monotonic() + 20
    while not s.ended and time.monotonic() < deadline:
        s.step(0.05)
    assert src.attempts == 3 and s.failure is None
    assert s.summary()["accepted"] == 10
    retried = [st for st in collect.statuses if st.state is LinkState.DISCONNECTED]
    assert [st.retries for st in retried] == [1, 2] and "port busy" in retried[0].message


def test_a_refused_binary_batch_over_zeromq_is_counted_once() -> None:
    # real sockets: an XPUB on ipc:// and the ZeroMQ source; totals: sent = accepted + rejected + lost
    import json
    import tempfile

    import zmq

    from adapters.zmq_stream import ZmqSource
    from monitor.commands.simulate import encode_binary

    ctx = zmq.Context()
    d = tempfile.mkdtemp(prefix="rgm")                     # ipc:// paths must stay short
    ep = f"ipc://{d}/feed.ipc"
    pub = ctx.socket(zmq.XPUB)
    pub.setsockopt(zmq.LINGER, 0)
    pub.bind(ep)
    src = ZmqSource(ep, context=ctx, name="probe")
    s = Session(src, Config(), [], live=True)
    try:
        s.open()
        deadline = time.monotonic() + 10
        while not pub.poll(0, zmq.POLLIN):
            s.step(0.02)
            assert time.monotonic() < deadline, "no subscription arrived"
        pub.recv()
        batches = [steady(1.0 + k, seq0=1000 * k) for k in range(4)]          # 4 x 1000 readings
        parts = [encode_binary(b, ("ne", "Te")) for b in batches]
        header = json.loads(parts[1][0])
        header["dtype"] = "|O"                                                  # refused: bad_dtype
        parts[1] = (json.dumps(header).encode(), parts[1][1])
        parts[2] = (parts[2][0], parts[2][1][:-8])                              # refused: size_mismatch
        for p in parts:
            pub.send_multipart(list(p))
        deadline = time.monotonic() + 10
        while s.summary()["accepted"] < 2000:                                   # the last batch is in
            s.step(0.05)
            assert time.monotonic() < deadline, s.summary()
        summary = s.summary()
    finally:
        s.close()
        pub.close(0)
        ctx.term()
        import shutil
        shutil.rmtree(d, ignore_errors=True)
    # no outside reference: four batches of 1000 readings sent by this test, two of them refused
    assert summary["rejected"] == {"bad_dtype": 1000, "size_mismatch": 1000}
    assert summary["lost"] == 0
    assert summary["accepted"] + summary["rejected_total"] + summary["lost"] == 4000


def test_after_a_clock_restart_a_silent_source_still_goes_stale(collect: CollectSink) -> None:
    # a probe controller that reboots counts time from 0 again: the engine's stale check must follow
    config = parse_config({"sources": {"stale_after": 2.0}}, None)
    wall = [1000.0]
    src = ListSource([steady(1.7e9, 100), steady(0.0, 100)], end=False)
    s = Session(src, config, [collect], engine=make_engine(config), live=True, wall=lambda: wall[0])
    s.open()
    s.step(0.01)
    s.step(0.01)
    assert s.summary()["restarts"] == 1 and s.summary()["accepted"] == 200
    # no outside reference: the figures are this test's own inputs (100 samples 1 ms apart, stale_after 2 s)
    assert s.now() == pytest.approx(0.099)           # the new clock
    wall[0] += 2.5                                   # 2.5 s of silence
    s.step(0.01)
    stale = [e for e in collect.alarms if "stale" in e.alarm]
    assert [e.state.value for e in stale] == ["unacknowledged"]
    assert stale[0].time == pytest.approx(2.099)     # in the new clock: data stopped + stale_after


def test_a_restart_inside_one_batch_keeps_every_alarms_journal_in_order(collect: CollectSink) -> None:
    # head (old clock) over the limit, tail (new clock, time back to 0) inside: one batch, two parts
    config = parse_config({"limit": [{"name": "dense", "quantity": "ne", "high": 2e17, "on_delay": 0.0,
                                       "priority": "high"}]}, None)
    head = steady(1.7e9, 500, ne=3e17)
    tail = steady(0.0, 500, ne=1e17)
    both = make_batch(np.concatenate([head.t, tail.t]), ne=np.concatenate([head.columns["ne"], tail.columns["ne"]]),
                      Te=np.concatenate([head.columns["Te"], tail.columns["Te"]]))
    s = Session(ListSource([both]), config, [collect], engine=make_engine(config), live=False)
    drive(s)
    dense = [e for e in collect.alarms if e.alarm == "dense"]
    assert dense and any(e.state.value == "unacknowledged" for e in dense)
    for before, after in zip(dense, dense[1:]):      # each event starts where the one before ended
        assert after.previous == before.state, [(e.previous.value, e.state.value, e.time) for e in dense]
    assert dense[-1].state.value == "returned_unacknowledged"
