"""The relay's pure parts: addresses (loopback unless asked), the config fingerprint, binary columns, strict JSON."""

from __future__ import annotations

import json

import numpy as np
import pytest

from monitor.errors import UsageError
from monitor.relay.publisher import RelayPublisher
from monitor.relay.wire import (clean, config_fingerprint, console_endpoint, decode_columns, dumps, encode_columns,
                                relay_endpoint, request_endpoint)
from tests.relay.relay_helpers import demo_session


def test_addresses_are_loopback_unless_asked():
    assert relay_endpoint("5590") == relay_endpoint(":5590") == "tcp://127.0.0.1:5590"
    assert relay_endpoint("ipc:///tmp/x") == "ipc:///tmp/x"
    assert relay_endpoint("relay+tcp://localhost:5590") == "tcp://localhost:5590"
    with pytest.raises(UsageError, match="not loopback"):
        relay_endpoint("tcp://0.0.0.0:5590")
    assert relay_endpoint("tcp://0.0.0.0:5590", allow_remote=True) == "tcp://0.0.0.0:5590"
    for bad in ("udp://x:1", "tcp://nohost", "ipc://", "tcp://127.0.0.1:port"):
        with pytest.raises(UsageError):
            relay_endpoint(bad)
    assert request_endpoint("tcp://127.0.0.1:5590") == "tcp://127.0.0.1:5591"
    assert request_endpoint("ipc:///tmp/r") == "ipc:///tmp/r.req"
    assert console_endpoint("relay+ipc:///tmp/r") == "ipc:///tmp/r"
    assert console_endpoint("relay+tcp://10.0.0.5:5590") == "tcp://10.0.0.5:5590"   # connecting anywhere is the user's call
    with pytest.raises(UsageError, match="relay\\+tcp"):
        console_endpoint("relay+serial:/dev/ttyUSB0")


def test_a_publisher_refuses_a_remote_address_and_says_where_it_bound(tmp_path):
    session = demo_session(duration=1.0)
    with pytest.raises(UsageError, match="not loopback"):
        RelayPublisher(session, "tcp://0.0.0.0:0")
    pub = RelayPublisher(session, "tcp://127.0.0.1:*", requests=False)
    try:
        assert pub.endpoint.startswith("tcp://127.0.0.1:") and pub.endpoint[-1].isdigit()
        assert pub.requests is None and pub.identity["requests"] is None
    finally:
        session.close()


def test_the_fingerprint_follows_the_content_not_the_layout():
    a = {"device": {"length": 0.3, "A": 40}, "limit": [{"quantity": "ne", "high": 1e18}]}
    b = {"limit": [{"high": 1e18, "quantity": "ne"}], "device": {"A": 40, "length": 0.3}}
    assert config_fingerprint(a) == config_fingerprint(b)
    assert config_fingerprint(a) != config_fingerprint({**a, "device": {"length": 0.31, "A": 40}})
    assert len(config_fingerprint({})) == 16


def test_columns_round_trip_and_a_wrong_payload_is_refused():
    t = np.arange(5, dtype=float)
    ne = np.array([1e17, np.nan, 3e17, 4e17, 5e17])
    h = {"fields": ["t", "ne"], "n": 5, "dtype": "<f8"}
    block = decode_columns(h, encode_columns([t, ne]))
    np.testing.assert_array_equal(block.columns["t"], t)
    np.testing.assert_array_equal(block.columns["ne"], ne)
    assert len(block) == 5
    with pytest.raises(ValueError, match="header says"):
        decode_columns({**h, "n": 6}, encode_columns([t, ne]))
    with pytest.raises(ValueError, match="dtype"):
        decode_columns({**h, "dtype": "<f4"}, encode_columns([t, ne]))


def test_json_is_strict():
    text = dumps({"a": float("nan"), "b": [1.0, float("inf")], "c": np.float64(2.5), "d": (1, 2)})
    assert json.loads(text) == {"a": None, "b": [1.0, None], "c": 2.5, "d": [1, 2]}
    assert clean({"x": np.int64(3)}) == {"x": 3}
