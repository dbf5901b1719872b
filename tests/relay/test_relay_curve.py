"""CURVE on the relay (zmq.auth key files): a console whose key the owner holds sees the run and may act; another key is refused at the handshake."""

from __future__ import annotations

import shutil
import time

import pytest
import zmq
import zmq.auth
from zmq.utils.monitor import recv_monitor_message

from monitor.errors import UsageError
from monitor.relay.console import RelayConsole
from monitor.relay.curve import client_socket_keys
from monitor.relay.owner import start_relay
from monitor.relay.requests import OperatorClient
from tests.relay.relay_helpers import demo_session, until

pytestmark = pytest.mark.skipif(not zmq.has("curve"), reason="libzmq without CURVE")


def _keys(tmp_path):
    keys = tmp_path / "keys"
    clients = tmp_path / "consoles"
    keys.mkdir()
    clients.mkdir()
    for name in ("owner", "bench", "stranger"):
        zmq.auth.create_certificates(str(keys), name)
    shutil.copy(keys / "bench.key", clients / "bench.key")
    return keys, clients


def test_only_a_console_with_a_known_key_sees_the_run_and_acts(tmp_path):
    keys, clients = _keys(tmp_path)
    session = demo_session(duration=30.0, rate=500.0)
    owner = start_relay(session, f"ipc://{tmp_path}/relay", operators={"key-of-the-bench": "bench-2"},
                        curve=(keys / "owner.key_secret", clients), interval=0.2)
    session.open()
    session.run()
    good = RelayConsole(f"relay+{owner.endpoint}", curve=(keys / "owner.key", keys / "bench.key_secret"))
    good.open()
    ctx = zmq.Context.instance()
    stranger = ctx.socket(zmq.SUB)
    client_socket_keys(stranger, (keys / "owner.key", keys / "stranger.key_secret"))
    events = stranger.get_monitor_socket()
    stranger.setsockopt(zmq.SUBSCRIBE, b"")
    stranger.connect(owner.endpoint)
    client = None
    try:
        assert until(lambda: good.snapshot() is not None, [good])
        assert good.accepted == 15000
        client = OperatorClient(good.requests, token="key-of-the-bench", name="office", curve=good.curve)
        assert client.request("acknowledge", "ne_high", run=good.run).applied
        # the stranger's handshake is refused: an event, not a wait for silence
        deadline = time.monotonic() + 10.0
        refused = False
        while time.monotonic() < deadline and not refused:
            if events.poll(100):
                refused = recv_monitor_message(events)["event"] in (zmq.EVENT_HANDSHAKE_FAILED_AUTH,
                                                                     zmq.EVENT_HANDSHAKE_FAILED_PROTOCOL,
                                                                     zmq.EVENT_HANDSHAKE_FAILED_NO_DETAIL)
        assert refused
        assert stranger.poll(0) == 0
    finally:
        if client is not None:
            client.close()
        stranger.disable_monitor()
        events.close(0)
        stranger.close(0)
        good.close()
        session.close()


def test_a_missing_key_file_is_a_usage_error(tmp_path):
    keys, clients = _keys(tmp_path)
    session = demo_session(duration=1.0)
    try:
        with pytest.raises(UsageError, match="CURVE key file"):
            start_relay(session, f"ipc://{tmp_path}/relay", curve=(keys / "nobody.key_secret", clients))
        with pytest.raises(UsageError, match="no secret key"):
            start_relay(session, f"ipc://{tmp_path}/relay", curve=(keys / "owner.key", clients))
        with pytest.raises(UsageError, match="not a directory"):
            start_relay(session, f"ipc://{tmp_path}/relay", curve=(keys / "owner.key_secret", tmp_path / "none"))
    finally:
        session.close()
