"""Hostile ZeroMQ input on real sockets (127.0.0.1): a frame over ZeroMQ's cap, a client the publisher refuses."""

from __future__ import annotations

import time
from pathlib import Path

import zmq
import zmq.auth
from zmq.auth.thread import ThreadAuthenticator

from adapter_helpers import Drained, drain, free_port
from adapters.base import LinkState
from adapters.zmq_stream import ZmqSource


def _pub(ctx: zmq.Context, endpoint: str) -> zmq.Socket:
    s = ctx.socket(zmq.XPUB)
    s.setsockopt(zmq.LINGER, 0)
    s.setsockopt(zmq.XPUB_VERBOSE, 1)
    s.setsockopt(zmq.SNDHWM, 0)
    s.bind(endpoint)
    return s


def _await_subscriber(pub: zmq.Socket, src: ZmqSource, into: Drained, timeout: float = 5.0) -> None:
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        into.add(src.poll(0.02))
        if pub.poll(0, zmq.POLLIN) and pub.recv()[:1] == b"\x01":
            return
    raise AssertionError(f"no subscription arrived; status {src.status()}")


def _send(pub: zmq.Socket, seqs: range) -> None:
    for s in seqs:
        pub.send(b'{"seq": %d, "ne": 4e16}' % s)


# point 1: one frame over ZeroMQ's own cap used to silence the source for good
def test_frame_over_zeromq_cap_is_counted_and_the_source_recovers(ctx: zmq.Context) -> None:
    ep = f"tcp://127.0.0.1:{free_port()}"
    src = ZmqSource(ep, context=ctx, max_frame=1024)        # hard cap: 1 MiB
    src.open()
    pub = _pub(ctx, ep)
    d = Drained()
    try:
        _await_subscriber(pub, src, d)
        _send(pub, range(0, 5))
        drain(src, lambda d: d.readings >= 5, timeout=5, into=d)
        pub.send(b"x" * (src.hard_cap + 1))                  # libzmq drops the connection on this one
        # the source notices the connection is gone for good, counts the frame, recreates its socket
        _await_subscriber(pub, src, d, timeout=10)
        assert src.dropped_connections == 1
        over = [r for r in d.rejections if r.reason == "oversized"]
        assert len(over) == 1 and over[0].count == 1 and over[0].seq_first is None
        assert "dropped the connection" in src.status().message or "recreated" in src.status().message
        _send(pub, range(5, 10))
        drain(src, lambda d: d.readings >= 10, timeout=5, into=d)
        assert d.seqs().tolist() == list(range(10))
        # a restarted publisher is picked up again as well
        pub.close(0)
        time.sleep(0.2)
        pub = _pub(ctx, ep)
        _await_subscriber(pub, src, d, timeout=10)
        _send(pub, range(10, 15))
        drain(src, lambda d: d.readings >= 15, timeout=5, into=d)
        assert d.seqs().tolist() == list(range(15))
        assert src.status().state is LinkState.CONNECTED
    finally:
        pub.close(0)
        src.close()


# point 11: a client the publisher refuses reported once, as its own state
def _states_during(src: ZmqSource, seconds: float) -> list[LinkState]:
    states: list[LinkState] = []
    end = time.monotonic() + seconds
    while time.monotonic() < end:
        st = src.poll(0.02).status
        assert st is not None
        if not states or states[-1] is not st.state:
            states.append(st.state)
    return states


def _curve_server(ctx: zmq.Context, ep: str, tmp: Path) -> tuple[zmq.Socket, ThreadAuthenticator, dict[str, Path]]:
    keys, allowed = tmp / "keys", tmp / "allowed"
    keys.mkdir()
    allowed.mkdir()
    server_pub, server_sec = zmq.auth.create_certificates(keys, "server")
    _, stranger_sec = zmq.auth.create_certificates(keys, "stranger")
    auth = ThreadAuthenticator(ctx)
    auth.start()
    auth.configure_curve(domain="*", location=str(allowed))
    pub = ctx.socket(zmq.PUB)
    pub.setsockopt(zmq.LINGER, 0)
    pub.curve_server = True
    pub.curve_publickey, pub.curve_secretkey = zmq.auth.load_certificate(server_sec)
    pub.bind(ep)
    return pub, auth, {"server_pub": Path(server_pub), "stranger_sec": Path(stranger_sec)}


def test_client_without_curve_keys_is_refused_once_without_flapping(ctx: zmq.Context, short_tmp: Path) -> None:
    ep = f"tcp://127.0.0.1:{free_port()}"
    pub, auth, _ = _curve_server(ctx, ep, short_tmp)
    src = ZmqSource(ep, context=ctx)                         # no keys at all
    try:
        src.open()
        states = _states_during(src, 2.5)
        assert LinkState.CONNECTED not in states, states
        assert states[-1] is LinkState.REFUSED, (states, src.status())
        assert states.count(LinkState.REFUSED) == 1, states
        assert "handshake" in src.status().message
    finally:
        src.close()
        pub.close(0)
        auth.stop()


def test_client_with_an_unknown_key_is_refused_once(ctx: zmq.Context, short_tmp: Path) -> None:
    ep = f"tcp://127.0.0.1:{free_port()}"
    pub, auth, keys = _curve_server(ctx, ep, short_tmp)
    src = ZmqSource(ep, context=ctx, curve=(keys["server_pub"], keys["stranger_sec"]))
    try:
        src.open()
        states = _states_during(src, 2.0)
        assert LinkState.CONNECTED not in states and states.count(LinkState.REFUSED) == 1, states
    finally:
        src.close()
        pub.close(0)
        auth.stop()


# point 6: ZeroMQ's receive queue counts messages; large messages get a lower RCVHWM (a byte bound)
def test_receive_queue_is_held_to_a_byte_budget_for_large_messages(ctx: zmq.Context) -> None:
    import numpy as np

    from adapters.zmq_stream import RECEIVE_BYTES

    ep = f"tcp://127.0.0.1:{free_port()}"
    src = ZmqSource(ep, context=ctx)
    src.open()
    pub = _pub(ctx, ep)
    d = Drained()
    try:
        _await_subscriber(pub, src, d)
        assert src.hwm_now == 200_000
        m = 2000                                              # 32 kB binary batches of t and ne
        sizes = []
        for i in range(20):
            t = np.arange(i * m, (i + 1) * m, dtype="<f8")
            msg = [b'{"fields": ["t", "ne"], "n": %d, "seq": %d}' % (m, i * m),
                   np.stack([t, np.full(m, 1e17)]).astype("<f8").tobytes()]
            sizes.append(len(msg[0]) + len(msg[1]))
            pub.send_multipart(msg)
        drain(src, lambda d: d.readings >= 20 * m, timeout=10, into=d)
        size = min(sizes)                                     # hwm x mean size <= the budget
        assert RECEIVE_BYTES // 2 <= src.hwm_now * size <= RECEIVE_BYTES, src.hwm_now
        assert src._sock.getsockopt(zmq.RCVHWM) == src.hwm_now    # the socket's own setting
    finally:
        pub.close(0)
        src.close()
