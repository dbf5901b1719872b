"""The ZeroMQ subscriber source: text, JSON and binary-batch frames from a PUB socket, optional CURVE.

One SUB socket connects to ``tcp://host:port`` or ``ipc://path`` (ZeroMQ
reconnects by itself, so a restarted publisher is picked up again). A
single-part message is JSON when it starts with ``{``, else text lines; a
two-part message is a binary batch (JSON header + payload). Messages of any
other shape, and frames over ``max_frame`` bytes, are rejected with a
reason. A socket monitor turns connect/disconnect/handshake events into
status. Nothing is ever unpickled.

Security defaults: only loopback tcp addresses (127.0.0.0/8, ::1,
localhost) and ipc:// are accepted unless ``allow_remote=True`` or CURVE is
configured. ``curve=(server_public_key_file, client_secret_key_file)``
uses zmq.auth key files (``zmq.auth.create_certificates``): the server's
``.key`` file and the client's ``.key_secret`` file.
"""

from __future__ import annotations

import ipaddress
import time
from pathlib import Path
from typing import Any

from adapters.base import FatalSourceError, LinkState, Polled, SourceStatus
from adapters.batch import Batch, Rejection
from adapters.parsing import (KEEP_RAW, MAX_FRAME, MAX_LINE, merge_batches, parse_binary_batch,
                              parse_json_frames, parse_text_lines)

__all__ = ["ZmqSource", "DEFAULT_RCVHWM", "is_loopback_endpoint"]

# Receive queue in messages. Measured here: a publisher with ZeroMQ's default
# send queue sending 40,000 JSON readings at 50,000/s over ipc while the
# subscriber stalled for 0.8 s delivered 3,500 with RCVHWM 1,000, 12,500 with
# 10,000, and all with 50,000 or more (over tcp the kernel's loopback buffers
# hid the difference). 200,000 rides out a ~4 s stall at 50,000 messages/s.
# Memory bound: RCVHWM x message size (JSON ~60 B: ~12 MB; binary batches of
# 1,000 x 5 fields are 40 kB each, so a long stall there is bounded by the
# publisher's rate, and a lower rcvhwm suits such streams).
DEFAULT_RCVHWM = 200_000
_DRAIN_MESSAGES = 50_000          # most messages handled in one poll
_DRAIN_SECONDS = 0.1              # most time spent receiving in one poll
COALESCE = 0.02                   # after the first message, gather for up to this long (fewer, larger batches)


def is_loopback_endpoint(endpoint: str) -> bool:
    """True for ipc:// and inproc:// and for tcp:// to 127.0.0.0/8, ::1 or localhost."""
    if endpoint.startswith(("ipc://", "inproc://")):
        return True
    if not endpoint.startswith("tcp://"):
        return False
    hostport = endpoint[len("tcp://"):]
    if ";" in hostport:                                   # source-address syntax: check the target part
        hostport = hostport.split(";", 1)[1]
    host = hostport.rsplit(":", 1)[0].strip("[]")
    if host == "localhost":
        return True
    try:
        return ipaddress.ip_address(host).is_loopback
    except ValueError:
        return False


class ZmqSource:
    """A Source subscribing to one ZeroMQ publisher (see module docstring)."""

    def __init__(self, endpoint: str, *, name: str | None = None,
                 curve: tuple[str | Path, str | Path] | None = None,
                 max_frame: int = MAX_FRAME, max_line: int = MAX_LINE, rcvhwm: int = DEFAULT_RCVHWM,
                 allow_remote: bool = False, topic: bytes = b"", context: Any = None,
                 coalesce: float = COALESCE, max_batch: int = 32_768) -> None:
        if not endpoint.startswith(("tcp://", "ipc://", "inproc://")):
            raise FatalSourceError(f"{endpoint}: a ZeroMQ source needs tcp://, ipc:// or inproc://")
        if not is_loopback_endpoint(endpoint) and not allow_remote and curve is None:
            raise FatalSourceError(f"{endpoint}: not a loopback address; connecting off this machine needs "
                                   "allow_remote (or CURVE keys)")
        self.endpoint = endpoint
        self.name = name or endpoint
        self.max_frame, self.max_line, self.rcvhwm = max_frame, max_line, rcvhwm
        self.curve = curve
        self.coalesce = coalesce
        self.max_batch = max_batch                # readings per merged Batch (the pipeline's sweet spot)
        self.topic = topic
        self._ctx_arg = context
        self._ctx: Any = None
        self._sock: Any = None
        self._mon: Any = None
        self._poller: Any = None
        self._state = LinkState.CONNECTING
        self._message = f"connecting to {endpoint}"
        self._retries = 0
        self._auth_failed = False
        self.messages = 0                         # messages received (any shape)

    # -- setup -----------------------------------------------------------------------------

    def _load_curve(self, sock: Any) -> None:
        import zmq
        import zmq.auth

        if not zmq.has("curve"):
            raise FatalSourceError("this libzmq was built without CURVE support")
        server_file, client_file = (Path(p) for p in self.curve)  # type: ignore[union-attr]
        try:
            server_public, _ = zmq.auth.load_certificate(server_file)
            client_public, client_secret = zmq.auth.load_certificate(client_file)
        except (OSError, ValueError) as exc:
            raise FatalSourceError(f"CURVE key file: {exc}") from exc
        if not client_secret:
            raise FatalSourceError(f"{client_file}: holds no secret key (use the .key_secret file)")
        sock.curve_serverkey = server_public
        sock.curve_publickey = client_public
        sock.curve_secretkey = client_secret

    def open(self) -> None:
        if self._sock is not None:
            return
        import zmq

        self._ctx = self._ctx_arg or zmq.Context.instance()
        sock = self._ctx.socket(zmq.SUB)
        try:
            sock.setsockopt(zmq.RCVHWM, self.rcvhwm)
            sock.setsockopt(zmq.LINGER, 0)
            sock.setsockopt(zmq.RCVBUF, 4 * 1024 * 1024)
            # a hard cap well above max_frame: frames between the two are rejected with a reason here;
            # beyond it libzmq drops the connection before buffering it (memory defence; seq shows the gap)
            sock.setsockopt(zmq.MAXMSGSIZE, max(4 * self.max_frame, 1 << 20))
            sock.setsockopt(zmq.RECONNECT_IVL, 100)
            sock.setsockopt(zmq.RECONNECT_IVL_MAX, 2000)
            if self.curve is not None:
                self._load_curve(sock)
            self._mon = sock.get_monitor_socket()
            sock.setsockopt(zmq.SUBSCRIBE, self.topic)
            sock.connect(self.endpoint)
        except zmq.ZMQError as exc:
            sock.close(0)
            raise FatalSourceError(f"{self.endpoint}: {exc}") from exc
        except FatalSourceError:
            sock.close(0)
            raise
        self._sock = sock
        self._poller = zmq.Poller()
        self._poller.register(sock, zmq.POLLIN)
        self._poller.register(self._mon, zmq.POLLIN)

    # -- status from the socket monitor -----------------------------------------------------

    def _drain_monitor(self) -> None:
        import zmq
        from zmq.utils.monitor import recv_monitor_message

        while True:
            try:
                ev = recv_monitor_message(self._mon, zmq.NOBLOCK)
            except zmq.Again:
                return
            except zmq.ZMQError:
                return
            e = ev["event"]
            if e == zmq.EVENT_CONNECTED and self.curve is None:
                self._state, self._message = LinkState.CONNECTED, f"connected to {self.endpoint}"
            elif e == zmq.EVENT_HANDSHAKE_SUCCEEDED:
                self._auth_failed = False
                self._state, self._message = LinkState.CONNECTED, f"connected to {self.endpoint}" + (
                    " (CURVE)" if self.curve is not None else "")
            elif e == zmq.EVENT_DISCONNECTED:
                if self._state is LinkState.CONNECTED:
                    self._retries += 1
                    self._state, self._message = LinkState.DISCONNECTED, f"publisher at {self.endpoint} went away; reconnecting"
                elif not self._auth_failed:
                    self._state, self._message = LinkState.DISCONNECTED, f"no session with {self.endpoint}; reconnecting"
            elif e in (getattr(zmq, "EVENT_HANDSHAKE_FAILED_AUTH", -1), getattr(zmq, "EVENT_HANDSHAKE_FAILED_PROTOCOL", -1),
                       getattr(zmq, "EVENT_HANDSHAKE_FAILED_NO_DETAIL", -1)):
                self._state, self._auth_failed = LinkState.DISCONNECTED, True
                self._message = f"handshake with {self.endpoint} failed (CURVE keys refused or mismatched); retrying"
            elif e == zmq.EVENT_CONNECT_RETRIED and self._state is not LinkState.CONNECTED:
                if self._state is LinkState.CONNECTING:
                    self._message = f"waiting for a publisher at {self.endpoint}"

    def status(self) -> SourceStatus:
        return SourceStatus(self.name, self._state, self._message, self._retries)

    # -- receiving -------------------------------------------------------------------------

    def _decode(self, msgs: list[tuple[float, list[bytes]]]) -> tuple[list[Batch], list[Rejection]]:
        """Messages in arrival order -> batches (runs of one kind parsed together) and rejections."""
        batches: list[Batch] = []
        rejects: list[Rejection] = []
        run_kind = ""
        run: list[bytes] = []
        run_t = 0.0

        def flush() -> None:
            if not run:
                return
            if run_kind == "json":
                p = parse_json_frames(run, self.name, run_t, max_frame=self.max_frame)
            else:
                p = parse_text_lines(run, self.name, run_t, max_line=self.max_line)
            batches.extend(p.batches)
            rejects.extend(p.rejections)
            run.clear()

        for received, parts in msgs:
            if len(parts) == 2:
                flush()
                res = parse_binary_batch(parts[0], parts[1], self.name, received, max_frame=self.max_frame)
                (rejects if isinstance(res, Rejection) else batches).append(res)  # type: ignore[arg-type]
                continue
            if len(parts) != 1:
                flush()
                raw = b"\n".join(p[:KEEP_RAW] for p in parts[:4])
                rejects.append(Rejection(self.name, "bad_frame_count", raw[:KEEP_RAW], received,
                                         f"{len(parts)}-part message; expected 1 (text/JSON) or 2 (binary)"))
                continue
            frame = parts[0]
            if len(frame) > self.max_frame:
                flush()
                rejects.append(Rejection(self.name, "oversized", frame[:KEEP_RAW], received,
                                         f"frame of {len(frame)} bytes over {self.max_frame}"))
                continue
            kind = "json" if frame.lstrip()[:1] == b"{" else "text"
            if kind != run_kind:
                flush()
                run_kind = kind
            run_t = received
            if kind == "json":
                run.append(frame)
            else:
                lines = frame.split(b"\n")
                if lines and lines[-1] == b"":
                    lines.pop()
                run.extend(ln[:-1] if ln.endswith(b"\r") else ln for ln in lines)
        flush()
        return batches, rejects

    def poll(self, timeout: float) -> Polled:
        import zmq

        if self._sock is None:
            if self._state is LinkState.ENDED:            # closed: nothing more will come
                return Polled(status=self.status())
            self.open()
        start = time.monotonic()
        events = dict(self._poller.poll(max(0, int(timeout * 1000))))
        if self._mon in events:
            self._drain_monitor()
        msgs: list[tuple[float, list[bytes]]] = []
        if self._sock in events:
            first = time.monotonic()
            hard_stop = first + _DRAIN_SECONDS
            gather_until = min(first + self.coalesce, start + max(timeout, 0.0))
            sock = self._sock
            recv = sock.recv_multipart
            now = time.time()
            while len(msgs) < _DRAIN_MESSAGES:
                try:
                    msgs.append((now, recv(zmq.NOBLOCK)))
                except zmq.Again:
                    left = gather_until - time.monotonic()
                    if left <= 0 or not sock.poll(max(1, int(left * 1000)), zmq.POLLIN):
                        break
                    now = time.time()
                    continue
                if len(msgs) % 256 == 0:
                    if time.monotonic() > hard_stop:
                        break
                    now = time.time()
        if msgs:
            self.messages += len(msgs)
            if self._state is not LinkState.CONNECTED:    # data flowing proves the link (monitor may lag)
                self._state, self._message = LinkState.CONNECTED, f"connected to {self.endpoint}"
        batches, rejects = self._decode(msgs)
        return Polled(batches=merge_batches(batches, max_len=self.max_batch), rejections=rejects, status=self.status())

    def close(self) -> None:
        if self._sock is not None:
            try:
                self._sock.disable_monitor()
            except Exception:  # noqa: BLE001 - monitor may already be gone with the context
                pass
            self._mon.close(0)
            self._sock.close(0)
            self._sock = None
        self._state, self._message = LinkState.ENDED, "closed"
