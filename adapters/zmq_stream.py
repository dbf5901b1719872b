"""The ZeroMQ subscriber source: text, JSON and binary-batch frames from a PUB socket, optional CURVE.

One SUB socket connects to ``tcp://host:port`` or ``ipc://path`` (ZeroMQ
reconnects by itself, so a restarted publisher is picked up again). A
single-part message is JSON when it starts with ``{``, else text lines; a
two-part message is a binary batch (JSON header + payload). Messages of any
other shape, and frames over ``max_frame`` bytes, are rejected with a
reason. A socket monitor turns connect/disconnect/handshake events into
status. A frame over the hard cap (``MAXMSGSIZE``) makes libzmq drop the
connection and never retry it: the monitor sees a disconnect with no retry
after it, and the socket is recreated (the frame counts as one ``oversized``
rejection and the status says so). A peer that refuses the handshake is
reported once, as state ``refused``, not as connected/disconnected flips.
Nothing is ever unpickled.

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
from adapters.framing import reject, split_lines, text_reject
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
RECEIVE_BYTES = 64 << 20          # ZeroMQ's receive queue is held to about this many bytes (RCVHWM from message size)
_DRAIN_BYTES = 32 << 20           # most bytes taken off the socket in one poll (bounds this adapter's own queue)
_DEAD_AFTER = 0.5                 # a disconnect with no retry scheduled within this long: libzmq gave up
_UNSHAKEN_REFUSED = 2             # connections closed during the handshake, in a row, before "refused"
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
        self._handshaken = False                  # the current connection completed its handshake
        self._unshaken = 0                        # connections closed during the handshake, in a row
        self._dropped_at: float | None = None     # a session ended; waiting for libzmq to schedule a retry
        self._pending: list[Rejection] = []       # rejections made outside a poll's messages
        self.dropped_connections = 0              # sockets recreated after libzmq gave the connection up
        self.hwm_now = rcvhwm                     # RCVHWM in force: lowered for large messages (RECEIVE_BYTES)
        self.messages = 0                         # messages received (any shape)

    @property
    def hard_cap(self) -> int:
        """ZeroMQ's own message size limit (MAXMSGSIZE): a bigger frame is never buffered."""
        return max(4 * self.max_frame, 1 << 20)

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
            self.hwm_now = self.rcvhwm
            sock.setsockopt(zmq.LINGER, 0)
            sock.setsockopt(zmq.RCVBUF, 4 * 1024 * 1024)
            # a hard cap well above max_frame: frames between the two are rejected with a reason here;
            # beyond it libzmq drops the connection before buffering it (memory defence) and never retries:
            # _event/_revive notice that, count the frame and recreate the socket
            sock.setsockopt(zmq.MAXMSGSIZE, self.hard_cap)
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
            self._event(ev["event"])

    def _event(self, e: int) -> None:
        """One socket-monitor event into the link state (see the module docstring)."""
        import zmq

        refused = LinkState.REFUSED
        if e == zmq.EVENT_CONNECTED:
            self._handshaken = False
            if self._state is LinkState.CONNECTING:
                self._message = f"connected to {self.endpoint}; handshaking"
        elif e == zmq.EVENT_HANDSHAKE_SUCCEEDED:
            self._auth_failed, self._handshaken, self._unshaken = False, True, 0
            self._state, self._message = LinkState.CONNECTED, f"connected to {self.endpoint}" + (
                " (CURVE)" if self.curve is not None else "") + self._drop_note()
        elif e == zmq.EVENT_DISCONNECTED:
            if self._handshaken:
                self._handshaken = False
                self._dropped_at = time.monotonic()
                self._retries += 1
                self._state, self._message = LinkState.DISCONNECTED, f"publisher at {self.endpoint} went away; reconnecting"
                return
            self._unshaken += 1
            if self._state is refused:
                return                                # said once; stays so until a handshake succeeds
            if self._unshaken >= _UNSHAKEN_REFUSED:
                self._refused("the publisher closes every connection during the handshake "
                              "(it may require CURVE keys, or refuse this one)")
            elif self._state is not LinkState.CONNECTING:
                self._state, self._message = LinkState.DISCONNECTED, f"no session with {self.endpoint}; reconnecting"
        elif e in (getattr(zmq, "EVENT_HANDSHAKE_FAILED_AUTH", -1), getattr(zmq, "EVENT_HANDSHAKE_FAILED_PROTOCOL", -1),
                   getattr(zmq, "EVENT_HANDSHAKE_FAILED_NO_DETAIL", -1)):
            self._auth_failed = True
            if self._state is not refused:
                self._refused("handshake failed (CURVE keys refused or mismatched)")
        elif e in (zmq.EVENT_CONNECT_RETRIED, zmq.EVENT_CONNECT_DELAYED, zmq.EVENT_CLOSED):
            self._dropped_at = None                   # libzmq is still trying: the link is alive
            if e == zmq.EVENT_CONNECT_RETRIED and self._state is LinkState.CONNECTING:
                self._message = f"waiting for a publisher at {self.endpoint}"

    def _refused(self, why: str) -> None:
        self._state = LinkState.REFUSED
        self._message = f"{self.endpoint}: {why}; still retrying"

    def _drop_note(self) -> str:
        n = self.dropped_connections
        return "" if not n else (f" (socket recreated {n} time{'s' if n != 1 else ''} after a frame over "
                                 f"{self.hard_cap} B dropped the connection)")

    def _revive(self) -> None:
        """libzmq dropped the connection and will not retry (a frame over MAXMSGSIZE): count that frame
        as one oversized rejection and recreate the socket, so that the publisher is picked up again."""
        self._dropped_at = None
        self.dropped_connections += 1
        self._pending.append(reject(self.name, "oversized", b"", time.time(),
                                    f"a frame over {self.hard_cap} B (ZeroMQ's cap) dropped the connection; "
                                    "the socket was recreated"))
        self._close_socket()
        self.open()
        self._state = LinkState.DISCONNECTED
        self._message = (f"a frame over {self.hard_cap} B made ZeroMQ drop {self.endpoint} for good; socket "
                         f"recreated ({self.dropped_connections} so far), reconnecting")

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
                rejects.append(reject(self.name, "bad_frame_count", raw[:KEEP_RAW], received,
                                      f"{len(parts)}-part message; expected 1 (text/JSON) or 2 (binary)"))
                continue
            frame = parts[0]
            if len(frame) > self.max_frame:
                flush()
                rejects.append(text_reject(self.name, "oversized", frame[:KEEP_RAW], received,
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
                run.extend(split_lines(frame))           # LF, CR or CRLF line ends
        flush()
        return batches, rejects

    def poll(self, timeout: float) -> Polled:
        import zmq

        if self._sock is None:
            if self._state is LinkState.ENDED:            # closed: nothing more will come
                return Polled(status=self.status())
            self.open()
        start = time.monotonic()
        if self._dropped_at is not None:
            timeout = min(timeout, _DEAD_AFTER)
        events = dict(self._poller.poll(max(0, int(timeout * 1000))))
        if self._mon in events:
            self._drain_monitor()
        if self._dropped_at is not None and time.monotonic() - self._dropped_at > _DEAD_AFTER:
            self._revive()
            events = {}
        msgs: list[tuple[float, list[bytes]]] = []
        size = 0
        if self._sock in events:
            first = time.monotonic()
            hard_stop = first + _DRAIN_SECONDS
            gather_until = min(first + self.coalesce, start + max(timeout, 0.0))
            sock = self._sock
            recv = sock.recv_multipart
            now = time.time()
            while len(msgs) < _DRAIN_MESSAGES and size < _DRAIN_BYTES:
                try:
                    parts = recv(zmq.NOBLOCK)
                    msgs.append((now, parts))
                    size += sum(map(len, parts))
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
            self._fit_queue(size / len(msgs))
            self.messages += len(msgs)
            if self._state is not LinkState.CONNECTED:    # data flowing proves the link (monitor may lag)
                self._state, self._message = LinkState.CONNECTED, f"connected to {self.endpoint}" + self._drop_note()
        batches, rejects = self._decode(msgs)
        if self._pending:
            rejects, self._pending = self._pending + rejects, []
        return Polled(batches=merge_batches(batches, max_len=self.max_batch), rejections=rejects, status=self.status())

    def _close_socket(self) -> None:
        if self._sock is not None:
            try:
                self._sock.disable_monitor()
            except Exception:  # noqa: BLE001 - monitor may already be gone with the context
                pass
            self._mon.close(0)
            self._sock.close(0)
            self._sock = None

    def _fit_queue(self, mean_bytes: float) -> None:
        """Hold ZeroMQ's receive queue near RECEIVE_BYTES: RCVHWM counts messages, so large messages (binary
        batches) get a lower one (never below 1,000, never above ``rcvhwm``). libzmq applies a changed
        RCVHWM to the connection it has."""
        import zmq

        want = int(min(self.rcvhwm, max(1000, RECEIVE_BYTES // max(mean_bytes, 1.0))))
        if want < self.hwm_now // 2 or (want > 2 * self.hwm_now and self.hwm_now < self.rcvhwm):
            self._sock.setsockopt(zmq.RCVHWM, want)
            self.hwm_now = want

    def close(self) -> None:
        self._close_socket()
        self._state, self._message = LinkState.ENDED, "closed"
