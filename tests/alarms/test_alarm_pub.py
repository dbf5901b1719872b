"""The alarm publisher over real ZeroMQ sockets on 127.0.0.1."""

from __future__ import annotations

import json
import time

import pytest
import zmq

from alarm_helpers import engine, frame
from monitor.alarms.publisher import AlarmPublisher, normalise_endpoint
from monitor.errors import UsageError


def _receive_until(sub: zmq.Socket, want: int, deadline: float) -> list[dict]:
    got = []
    while len(got) < want and time.monotonic() < deadline:
        if sub.poll(50):
            got.append(json.loads(sub.recv()))
    return got


def test_subscriber_receives_the_journal_json_of_each_event() -> None:
    eng = engine([{"name": "hot", "quantity": "Te", "high": 5.0, "priority": "urgent"}])
    events = eng.process(frame([0.0, 1.0, 2.0, 3.0], Te=[3.0, 9.0, 9.0, 3.0]))
    pub = AlarmPublisher("tcp://127.0.0.1:*")
    assert pub.endpoint.startswith("tcp://127.0.0.1:")
    ctx = zmq.Context.instance()
    sub = ctx.socket(zmq.SUB)
    sub.setsockopt(zmq.LINGER, 0)
    sub.setsockopt(zmq.SUBSCRIBE, b"")
    sub.connect(pub.endpoint)
    try:
        deadline = time.monotonic() + 10.0
        probe = events[0]
        while time.monotonic() < deadline:      # wait for the subscription to be in place
            pub.on_alarm(probe)
            if sub.poll(50):
                sub.recv()
                break
        else:
            pytest.fail("subscriber never connected")
        while sub.poll(100):                    # drain extra probes
            sub.recv()
        for e in events:
            pub.on_alarm(e)
        got = _receive_until(sub, len(events), time.monotonic() + 5.0)
        assert got == [e.to_json() for e in events]
        assert got[1]["type"] == "alarm" and got[1]["alarm"] == "hot" and got[1]["state"] == "unacknowledged"
        assert pub.dropped == 0 and pub.sent >= len(events) + 1
    finally:
        sub.close()
        pub.close()
    pub.on_alarm(events[0])      # after close: ignored, no exception


def test_endpoints_default_to_loopback_and_refuse_others() -> None:
    assert normalise_endpoint(None) == "tcp://127.0.0.1:5581"
    assert normalise_endpoint("6000") == "tcp://127.0.0.1:6000"
    assert normalise_endpoint("ipc:///tmp/x") == "ipc:///tmp/x"
    with pytest.raises(UsageError, match="not loopback"):
        normalise_endpoint("tcp://0.0.0.0:6000")
    assert normalise_endpoint("tcp://0.0.0.0:6000", allow_remote=True) == "tcp://0.0.0.0:6000"
    with pytest.raises(UsageError):
        normalise_endpoint("udp://127.0.0.1:1")


def test_bind_failure_is_a_usage_error() -> None:
    pub = AlarmPublisher("tcp://127.0.0.1:*")
    try:
        with pytest.raises(UsageError, match="cannot bind"):
            AlarmPublisher(pub.endpoint)
    finally:
        pub.close()
