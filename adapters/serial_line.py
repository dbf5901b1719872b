"""The serial-line source: a pyserial port read in bulk by a background thread, framed into text lines.

Accepts pyserial URLs (``loop://``, ``socket://host:port``, ``rfc2217://...``)
and device paths (``/dev/ttyUSB0``, ``COM3``), plus our ``serial:PORT[@BAUD]``
spelling (see ``parse_serial_spec``). The reader thread reads what is waiting
(``read(in_waiting or 1)`` with a short timeout, the pattern of pyserial's own
threaded reader) and hands chunks to ``poll()``, which frames and parses them
in the caller's thread. A port that fails or vanishes becomes status
``disconnected`` and is reopened with exponential backoff until it returns; a
line cut off by the loss is counted as ``truncated``. Only a URL or setting
pyserial refuses outright (unknown scheme, impossible baud rate) is fatal.
"""

from __future__ import annotations

import errno
import os
import queue
import threading
import time
from typing import Any

from adapters.base import FatalSourceError, LinkState, Polled, SourceStatus
from adapters.batch import Batch, Rejection
from adapters.framing import text_reject
from adapters.parsing import MAX_LINE, LineFramer, merge_batches, parse_text_lines

__all__ = ["SerialSource", "parse_serial_spec", "DEFAULT_BAUD"]

DEFAULT_BAUD = 115200
READ_MAX = 16384                # bytes taken from the port in one read
QUEUE_CHUNKS = 4096             # chunks waiting for poll(): at most QUEUE_CHUNKS x READ_MAX = 64 MiB; when full the
                                # reader waits and the port's own buffer fills (a stalled consumer, not a leak)
_URL_SCHEMES = ("loop://", "socket://", "rfc2217://", "spy://", "alt://", "hwgrep://", "cp2110://")


def parse_serial_spec(spec: str) -> tuple[str, int]:
    """``serial:PORT[@BAUD]`` or a pyserial URL / device path -> (url, baud)."""
    body = spec[len("serial:"):] if spec.startswith("serial:") else spec
    baud = DEFAULT_BAUD
    if not body.startswith(_URL_SCHEMES) and "@" in body:
        body, _, b = body.rpartition("@")
        if not b.isdigit() or int(b) <= 0:
            raise FatalSourceError(f"{spec}: baud rate {b!r} is not a positive integer")
        baud = int(b)
    if not body:
        raise FatalSourceError(f"{spec}: no port named")
    return body, baud


class SerialSource:
    """A Source reading ``key=value`` text lines from a serial port (see module docstring)."""

    def __init__(self, url: str, baud: int = DEFAULT_BAUD, *, name: str | None = None,
                 max_line: int = MAX_LINE, read_timeout: float = 0.05,
                 backoff: tuple[float, float] = (0.1, 2.0), queue_chunks: int = QUEUE_CHUNKS,
                 coalesce: float = 0.05) -> None:
        if url.startswith("serial:"):
            url, baud = parse_serial_spec(url)
        self.url, self.baud = url, baud
        self.name = name or (url if url.startswith(_URL_SCHEMES) else f"serial:{url}")
        self._framer = LineFramer(max_line)
        self._max_line = max_line
        self._read_timeout = read_timeout
        self._backoff = backoff
        self.coalesce = coalesce                  # after the first chunk, gather for up to this long
        self._q: queue.Queue[tuple[str, float, bytes]] = queue.Queue(maxsize=queue_chunks)
        self._stop = threading.Event()
        self._lock = threading.Lock()
        self._status = SourceStatus(self.name, LinkState.CONNECTING, f"opening at {baud} baud")
        self._fatal: FatalSourceError | None = None
        self._thread: threading.Thread | None = None
        self._port: Any = None
        self.connected = threading.Event()       # set while the port is open (tests and the screen wait on it)
        self.bytes_read = 0
        self.skipped = 0                          # blank and comment-only lines (neither readings nor errors)

    # -- the reader thread ------------------------------------------------------------------

    @property
    def port(self) -> Any:
        """The open pyserial object, or None (for loop:// tests that write into it)."""
        return self._port

    def _set(self, state: LinkState, message: str, retries: int = 0) -> None:
        with self._lock:
            self._status = SourceStatus(self.name, state, message, retries)

    def _open_port(self) -> Any:
        import serial  # lazy: pyserial only when a serial source runs

        try:
            return serial.serial_for_url(self.url, baudrate=self.baud, timeout=self._read_timeout)
        except ValueError as exc:                       # unknown URL scheme, bad setting: never works
            raise FatalSourceError(f"{self.url}: {exc}") from exc
        except serial.SerialException as exc:
            # a file that is there but is no terminal (/dev/zero, a directory) never becomes a port
            if exc.errno in (errno.ENOTTY, errno.EISDIR) or os.strerror(errno.ENOTTY) in str(exc):
                raise FatalSourceError(f"{self.url}: not a serial port ({exc})") from exc
            raise

    def _run(self) -> None:
        import serial

        delay, retries = self._backoff[0], 0
        while not self._stop.is_set():
            try:
                port = self._open_port()
            except FatalSourceError as exc:
                self._fatal = exc
                self._set(LinkState.FAILED, str(exc))
                return
            except (serial.SerialException, OSError) as exc:
                retries += 1
                self._set(LinkState.DISCONNECTED, f"cannot open {self.url}: {exc}; retry in {delay:.1f} s", retries)
                if self._stop.wait(delay):
                    return
                delay = min(delay * 2.0, self._backoff[1])
                continue
            self._port = port
            delay = self._backoff[0]
            self._set(LinkState.CONNECTED, f"{self.url} at {self.baud} baud", retries)
            self.connected.set()
            try:
                while not self._stop.is_set():
                    data = port.read(min(port.in_waiting or 1, READ_MAX))
                    if data:
                        self.bytes_read += len(data)
                        self._put(("data", time.time(), data))
            except (serial.SerialException, OSError, TypeError, AttributeError) as exc:
                # TypeError/AttributeError: pyserial internals after the fd vanished under it
                if not self._stop.is_set():
                    retries += 1
                    self._set(LinkState.DISCONNECTED, f"lost {self.url}: {exc}", retries)
            finally:
                self.connected.clear()
                self._port = None
                self._put(("lost", time.time(), b""))
                try:
                    port.close()
                except Exception:  # noqa: BLE001 - closing a dead port may fail in many ways; it is gone either way
                    pass

    def _put(self, item: tuple[str, float, bytes]) -> None:
        """Queue a chunk for poll(); while the queue is full, wait (until close)."""
        while not self._stop.is_set():
            try:
                self._q.put(item, timeout=0.1)
                return
            except queue.Full:
                continue

    # -- the Source protocol ----------------------------------------------------------------

    def open(self) -> None:
        if self._thread is not None:
            return
        self._thread = threading.Thread(target=self._run, name=f"serial-reader {self.url}", daemon=True)
        self._thread.start()

    def status(self) -> SourceStatus:
        with self._lock:
            return self._status

    def poll(self, timeout: float) -> Polled:
        if self._thread is None:
            self.open()
        if self._fatal is not None:
            raise self._fatal
        items: list[tuple[str, float, bytes]] = []
        start = time.monotonic()
        try:
            items.append(self._q.get(timeout=max(0.0, timeout)))
            gather_until = min(time.monotonic() + self.coalesce, start + max(timeout, 0.0))
            while len(items) < 10_000:
                try:
                    items.append(self._q.get_nowait())
                except queue.Empty:
                    left = gather_until - time.monotonic()
                    if left <= 0:
                        break
                    items.append(self._q.get(timeout=left))
        except queue.Empty:
            pass
        batches: list[Batch] = []
        rejections: list[Rejection] = []
        for kind, received, data in items:
            if kind == "lost":
                rest = self._framer.flush()
                if rest:
                    rejections.append(text_reject(self.name, "truncated", rest, received,
                                                  "line cut off when the link was lost"))
                continue
            lines, over = self._framer.feed(data)
            for raw in over:
                rejections.append(text_reject(self.name, "oversized", raw, received,
                                              f"line longer than {self._max_line} bytes (first {len(raw)} kept)"))
            if lines:
                parsed = parse_text_lines(lines, self.name, received, max_line=self._max_line)
                batches.extend(parsed.batches)
                rejections.extend(parsed.rejections)
                self.skipped += parsed.skipped
        return Polled(batches=merge_batches(batches), rejections=rejections, status=self.status())

    def close(self) -> None:
        self._stop.set()
        port = self._port
        if port is not None:
            try:
                port.cancel_read()
            except Exception:  # noqa: BLE001 - not every pyserial backend can cancel a read
                pass
        if self._thread is not None:
            self._thread.join(timeout=2.0)
        self._set(LinkState.ENDED, "closed")
