"""The relay's stream over real ZeroMQ sockets: a console's picture equals the owner's, late joiners, stalls, restarts."""

from __future__ import annotations

import threading

import numpy as np
import zmq

from adapters.base import LinkState
from monitor.relay.console import RelayConsole
from monitor.relay.owner import start_relay
from monitor.relay.publisher import RelayPublisher
from tests.relay.relay_helpers import accepted, demo_session, until


def _views(views):  # the part of an alarm view both sides must agree on
    return sorted((v.alarm, v.state.value, v.latched, v.since) for v in views)


def test_console_picture_equals_the_owners(tmp_path):
    session = demo_session(duration=30.0, rate=500.0)
    owner = start_relay(session, f"ipc://{tmp_path}/relay", interval=0.2)
    console = RelayConsole(f"relay+{owner.endpoint}")
    console.open()
    try:
        assert until(lambda: console.states >= 1, [console])
        session.open()
        session.run()
        total = accepted(session)
        assert total == 15000
        assert until(lambda: console.accepted == total, [console])
        assert until(lambda: console.states >= 3, [console], deadline=5.0)   # a state after the last data
        assert console.received == total and console.missed == 0 and console.gaps == 0
        snap, mine = console.snapshot(), session.snapshot()
        assert snap is not None
        assert snap.counts[session.name].accepted == mine.counts[session.name].accepted == total
        assert _views(snap.alarms) == _views(session.engine.views())
        assert any(v.state.value == "unacknowledged" for v in snap.alarms)     # the run raised alarms
        assert snap.latest == mine.latest
        assert snap.data_time == mine.data_time and snap.discharge_on == mine.discharge_on
        np.testing.assert_array_equal(snap.trail_t, mine.trail_t)
        for name in mine.trail:
            np.testing.assert_array_equal(snap.trail[name], mine.trail[name])
        # every alarm event of the owner reached the console, in order
        assert [(e.alarm, e.state) for e in console.events] == [(e.alarm, e.state) for e in session.recent_events]
        assert console.identity["source"] == session.name and len(console.identity["config"]) == 16
    finally:
        session.close()
        console.close()


def test_late_joiner_gets_the_state_at_once(tmp_path):
    session = demo_session(duration=30.0, rate=500.0)
    # a long interval: the state the late joiner gets is the one sent for its subscription
    owner = RelayPublisher(session, f"ipc://{tmp_path}/relay", interval=600.0)
    session.open()
    while accepted(session) < 12000:
        session.step()
    assert until(lambda: owner.pending == 0)      # what the run made so far went out before the console came
    console = RelayConsole(f"relay+{owner.endpoint}")
    console.open()
    try:
        assert until(lambda: console.snapshot() is not None, [console])
        snap, mine = console.snapshot(), session.snapshot()
        assert snap is not None and console.received == 0
        assert snap.counts[session.name].accepted == accepted(session)
        assert _views(snap.alarms) == _views(session.engine.views())
        assert snap.latest == mine.latest and len(snap.trail_t) == len(mine.trail_t) > 0
        before = accepted(session)
        session.run()
        assert until(lambda: console.accepted == accepted(session), [console])
        assert console.received == accepted(session) - before and console.missed == 0
    finally:
        session.close()
        console.close()


def test_a_stalled_console_does_not_hold_back_the_owner_or_the_others(tmp_path):
    session = demo_session(duration=60.0, rate=5000.0, chunk=500)        # 600 data messages
    # 100 messages queued per console: room for a reader on a busy machine, not for one that stopped
    owner = RelayPublisher(session, f"ipc://{tmp_path}/relay", sndhwm=100, interval=0.2)
    reader = RelayConsole(f"relay+{owner.endpoint}")
    stalled = RelayConsole(f"relay+{owner.endpoint}", rcvhwm=5)
    reader.open()
    stalled.open()
    try:
        assert until(lambda: reader.states >= 1 and stalled.states >= 1, [reader, stalled])
        stop = threading.Event()

        def read() -> None:
            while not stop.is_set():
                reader.poll(0.01)

        thread = threading.Thread(target=read)
        thread.start()
        session.open()
        session.run()          # the stalled console reads nothing while the owner runs to its end
        total = accepted(session)
        assert total == 300000 and session.ended
        assert until(lambda: reader.accepted == total)
        stop.set()
        thread.join()
        assert reader.received == total and reader.missed == 0, reader.summary()
        # the stalled console wakes up: it says it fell behind, counts its loss, catches up from a state
        assert until(lambda: stalled.accepted == total and not stalled.behind, [stalled]), stalled.summary()
        assert stalled.missed > 0 and stalled.gaps > 0, stalled.summary()
        assert stalled.received + stalled.missed == total
        assert any("fell behind" in n for n in stalled.notices)
        assert any("caught up" in n for n in stalled.notices)
        snap = stalled.snapshot()
        assert snap is not None and _views(snap.alarms) == _views(session.engine.views())
    finally:
        session.close()
        reader.close()
        stalled.close()


def test_owner_restart_is_seen_as_a_new_run(tmp_path):
    endpoint = f"ipc://{tmp_path}/relay"
    first = demo_session(duration=2.0)
    pub = RelayPublisher(first, endpoint, interval=0.1)
    console = RelayConsole(f"relay+{endpoint}")
    console.open()
    try:
        assert until(lambda: console.states >= 1, [console])
        first.open()
        first.run()
        assert until(lambda: console.accepted == accepted(first), [console])
        run1 = console.run
        first.close()
        assert until(lambda: console.link().state is LinkState.DISCONNECTED, [console])
        second = demo_session(duration=1.0)
        pub2 = RelayPublisher(second, endpoint, interval=0.1)
        try:
            assert until(lambda: console.run == pub2.run, [console])
            assert run1 == pub.run != pub2.run and console.runs == [pub.run, pub2.run]
            assert any("a new run began" in n for n in console.notices)
            assert console.link().state is LinkState.CONNECTED
            second.open()
            second.run()
            assert until(lambda: console.accepted == accepted(second), [console])
            assert console.received == accepted(second) == 500 and console.missed == 0
        finally:
            second.close()
    finally:
        console.close()


def test_unreadable_messages_are_counted_and_change_nothing(tmp_path):
    ctx = zmq.Context.instance()
    pub = ctx.socket(zmq.PUB)
    endpoint = f"ipc://{tmp_path}/hostile"
    pub.bind(endpoint)
    console = RelayConsole(f"relay+{endpoint}")
    console.open()
    try:
        bad = [[b"regime.data", b"{not json"], [b"regime.data", b'{"v": 1, "type": "data", "run": "x", "msg": 1, '
                                                 b'"n": 5, "fields": ["t"], "dtype": "<f8"}', b"\x00" * 8],
               [b"regime.state", b'{"v": 99}'], [b"regime.alarm"]]

        def sent() -> bool:
            for parts in bad:
                pub.send_multipart(parts)
            return console.bad_messages >= len(bad)

        assert until(sent, [console])
        assert console.snapshot() is None and console.received == 0 and console.run is None
    finally:
        console.close()
        pub.close(0)

