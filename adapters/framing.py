"""Cutting bytes into records: a stream into lines (LineFramer) and a binary batch's header + payload."""

from __future__ import annotations

import json
import re

import numpy as np

from adapters.batch import Batch, Rejection

__all__ = ["MAX_LINE", "MAX_FRAME", "MAX_HEADER", "MAX_JSON", "MAX_FIELDS", "KEEP_RAW", "DTYPES", "REASONS", "T_LIMIT",
           "LineFramer", "parse_binary_batch", "reject", "refuse_constant", "KEY", "RESERVED", "SEQ_MAX",
           "seq_in_text", "binary_span", "shown", "split_lines"]

MAX_LINE = 4096                 # bytes in one text line (without the line end)
MAX_FRAME = 16 * 1024 * 1024    # bytes in one ZeroMQ frame or binary payload
MAX_HEADER = 64 * 1024          # bytes in a binary batch's JSON header
MAX_JSON = 1 << 20              # bytes in one JSON reading (one object of a few keys; bounds the decoder's memory)
MAX_FIELDS = 256                # columns in one binary batch
KEEP_RAW = 4096                 # bytes kept of an oversized input in its Rejection
DTYPES = frozenset({"<f8", ">f8", "<f4", ">f4", "<i4", ">i4", "<i8", ">i8"})
REASONS = (
    "malformed", "bad_value", "not_finite", "bad_time", "bad_seq", "duplicate_key",
    "bad_key", "no_values", "bad_json", "bad_binary_header", "bad_dtype",
    "size_mismatch", "oversized", "bad_frame_count", "truncated",
)
KEY = re.compile(r"[A-Za-z_][A-Za-z0-9_.\-]{0,63}\Z")   # an instrument key
RESERVED = ("t", "seq")
SEQ_MAX = 2**63 - 1
T_LIMIT = 1e10                  # |data time| in seconds beyond this is refused (bad_time): ~317 years,
                                # room for Unix epoch seconds to the year 2286 and any relative clock
_SEQ_TEXT = re.compile(rb'(?:^|[\s,])seq=(\d{1,19})(?=[\s,#]|\Z)|"seq"\s*:\s*(\d{1,19})(?![\d.eE])')
_LINE_END = re.compile(rb"\r\n|\r|\n")


def reject(source: str, reason: str, raw: bytes, received: float, detail: str = "", *,
           count: int = 1, seq: tuple[int, int] | None = None) -> Rejection:
    """A Rejection keeping at most KEEP_RAW bytes of the input (the detail says how long it was).

    ``count`` is the readings it stands for, ``seq`` the (first, last) seq numbers it covered (inclusive)."""
    if len(raw) > KEEP_RAW:
        detail = f"{detail}; {len(raw)} bytes, first {KEEP_RAW} kept".lstrip("; ")
        raw = raw[:KEEP_RAW]
    first, last = seq if seq is not None else (None, None)
    return Rejection(source=source, reason=reason, raw=bytes(raw), received=received, detail=detail,
                     count=max(1, count), seq_first=first, seq_last=last)


def seq_in_text(raw: bytes) -> int | None:
    """The seq a refused text line (``seq=N``) or JSON frame (``"seq": N``) still shows, or None.

    Only a plain non-negative integer up to SEQ_MAX counts; a text line's comment is not looked at."""
    head = raw[:KEEP_RAW]
    if b"#" in head and not head.lstrip().startswith(b"{"):
        head = head.split(b"#", 1)[0]
    m = _SEQ_TEXT.search(head)
    if m is None:
        return None
    v = int(m.group(1) or m.group(2))
    return v if v <= SEQ_MAX else None


def text_reject(source: str, reason: str, raw: bytes, received: float, detail: str = "",
                seq: int | None = None) -> Rejection:
    """A refused text line or JSON frame: one reading, with the seq it shows (``seq`` if the parser read it)."""
    if seq is None:
        seq = seq_in_text(raw)
    return reject(source, reason, raw, received, detail, seq=None if seq is None else (seq, seq))


def binary_span(header: object, payload_len: int, max_frame: int = MAX_FRAME) -> tuple[int, tuple[int, int] | None]:
    """How many readings a refused binary batch stands for, and the (first, last) seq it covered.

    The rule, one sentence for the README: a refused binary batch whose header's n can be trusted (a
    whole number from 1 to what one frame can hold) counts as the readings its payload held (rounded
    up, at most n; n itself when its dtype is not one of ours) with the seq numbers from its header's
    seq on; any other refused batch counts as one reading, standing for its header's seq if it has one,
    and the gap its other readings leave in the seq counts them as lost. So each seq number counts once."""
    if not isinstance(header, dict):
        return 1, None
    fields, n, raw_seq, dtype = header.get("fields"), header.get("n"), header.get("seq"), header.get("dtype", "<f8")
    seq = raw_seq if type(raw_seq) is int and 0 <= raw_seq <= SEQ_MAX else None
    one: tuple[int, tuple[int, int] | None] = (1, (seq, seq) if seq is not None else None)
    if not isinstance(fields, list) or not fields:
        return one
    known = isinstance(dtype, str) and dtype in DTYPES
    size = np.dtype(dtype).itemsize if known else min(np.dtype(d).itemsize for d in DTYPES)
    per = len(fields) * size
    if type(n) is not int or not 1 <= n <= max(1, max_frame // per):
        return one
    count = max(1, min(n, -(-payload_len // per))) if known else n
    if seq is not None and seq <= SEQ_MAX - count:
        return count, (seq, seq + count - 1)
    return count, None


def shown(text: str, limit: int = 80) -> str:
    """``text`` for a message: invisible and non-ASCII characters escaped (a byte-order mark shows as \\ufeff)."""
    out = text.encode("ascii", "backslashreplace").decode("ascii")
    out = "".join(c if c.isprintable() else repr(c)[1:-1] for c in out)
    return out if len(out) <= limit else out[:limit] + "..."


def split_lines(data: bytes) -> list[bytes]:
    """Cut a complete text frame into lines at LF, CR or CRLF (a final line end adds no empty line)."""
    if b"\r" not in data:
        lines = data.split(b"\n")
    else:
        lines = _LINE_END.split(data)
    if lines and lines[-1] == b"":
        lines.pop()
    return lines


def refuse_constant(name: str) -> float:
    """json parse_constant hook: NaN and Infinity are refused (not_finite)."""
    raise ValueError(f"non-finite constant {name}")


# ----------------------------------------------------------------------------- binary batches

def parse_binary_batch(header: bytes, payload: bytes, source: str, received: float, *,
                       max_frame: int = MAX_FRAME) -> Batch | Rejection:
    """A binary batch: JSON header ``{"fields": [...], "n": N, "seq": first, "dtype": "<f8"}`` + payload.

    The payload holds one contiguous column of N values per field, in field
    order. ``seq`` (optional) numbers the first reading; the rest follow by
    one. ``dtype`` must be one of DTYPES (plain little/big-endian floats and
    ints; never objects, nothing is unpickled). A field ``t`` is the data time.
    """
    raw = bytes(header) + b"\n" + bytes(payload[:KEEP_RAW])
    h: object = None
    if len(header) <= MAX_HEADER:
        try:
            h = json.loads(header, parse_constant=refuse_constant)
        except (ValueError, RecursionError) as exc:
            return reject(source, "bad_binary_header", raw, received, f"header is not JSON: {str(exc)[:80]}")

    def refuse(reason: str, detail: str) -> Rejection:
        count, span = binary_span(h, len(payload), max_frame)
        return reject(source, reason, raw, received, detail, count=count, seq=span)

    if len(header) > MAX_HEADER or len(payload) > max_frame:
        return refuse("oversized", f"header {len(header)} B, payload {len(payload)} B")
    if not isinstance(h, dict) or set(h) - {"fields", "n", "seq", "dtype"} or "fields" not in h or "n" not in h:
        h = None                                    # not a header: nothing in it can be trusted
        return refuse("bad_binary_header", "header needs fields and n (seq, dtype optional), nothing else")
    fields, n, seq, dtype = h["fields"], h["n"], h.get("seq"), h.get("dtype", "<f8")
    if (not isinstance(fields, list) or not 1 <= len(fields) <= MAX_FIELDS
            or not all(isinstance(f, str) and KEY.match(f) and f != "seq" for f in fields)
            or len(set(fields)) != len(fields) or not [f for f in fields if f != "t"]):
        return refuse("bad_binary_header", "fields must be distinct names with a channel")
    if type(n) is not int or n < 0:
        return refuse("bad_binary_header", "n must be a non-negative integer")
    if seq is not None and (type(seq) is not int or not 0 <= seq <= SEQ_MAX - n):
        h = {k: v for k, v in h.items() if k != "seq"}
        return refuse("bad_seq", "seq must be a non-negative integer")
    if not isinstance(dtype, str) or dtype not in DTYPES:
        return refuse("bad_dtype", f"dtype must be one of {sorted(DTYPES)}")
    dt = np.dtype(dtype)
    if len(payload) != n * len(fields) * dt.itemsize:
        return refuse("size_mismatch", f"payload {len(payload)} B, header says {n} x {len(fields)} x {dt.itemsize} B")
    data = np.frombuffer(payload, dtype=dt).reshape(len(fields), n).astype(np.float64)   # a copy, native order
    cols = {f: data[i] for i, f in enumerate(fields) if f != "t"}
    has_t = "t" in fields
    if has_t and n and not (np.abs(data[fields.index("t")]) <= T_LIMIT).all():   # NaN fails too
        return refuse("bad_time", f"a time is not finite or beyond {T_LIMIT:g} s (the batch is refused whole)")
    t = data[fields.index("t")] if has_t else np.full(n, received)
    seqs = np.arange(seq, seq + n, dtype=np.int64) if seq is not None else None
    return Batch(source=source, t=t, columns=cols, seq=seqs, t_from_source=has_t)


# ----------------------------------------------------------------------------- stream framing

class LineFramer:
    """Split a byte stream into lines at LF, CR or CRLF, keeping partial lines across feeds.

    A CR that ends one feed and an LF that starts the next are one line end.
    A line longer than ``max_line`` is refused once (its first KEEP_RAW bytes
    kept); the rest of it is skipped up to its line end. ``flush()`` hands
    back a pending partial line (e.g. when the link drops mid-line).
    """

    def __init__(self, max_line: int = MAX_LINE) -> None:
        self.max_line = max_line
        self._buf = b""
        self._discarding = False
        self._after_cr = False                  # the last feed ended in CR: an LF first in the next is its pair
        self.discarded_bytes = 0

    @property
    def pending(self) -> int:
        """Bytes of a partial line waiting for its line end."""
        return len(self._buf)

    @property
    def discarding(self) -> bool:
        """True while skipping the rest of an oversized line (already refused)."""
        return self._discarding

    def feed(self, data: bytes) -> tuple[list[bytes], list[bytes]]:
        """Return (complete lines, oversized lines) found so far."""
        over: list[bytes] = []
        if not data:
            return [], over
        if self._after_cr and data[:1] == b"\n":
            data = data[1:]
        self._after_cr = data[-1:] == b"\r"
        if self._discarding:
            m = _LINE_END.search(data)
            if m is None:
                self.discarded_bytes += len(data)
                return [], over
            self.discarded_bytes += m.start()
            data = data[m.end():]
            self._discarding = False
        buf = self._buf + data if self._buf else data
        parts = _LINE_END.split(buf) if b"\r" in buf else buf.split(b"\n")
        rest = parts.pop()
        lines = parts
        if lines and max(map(len, lines)) > self.max_line:
            over = [p[:KEEP_RAW] for p in lines if len(p) > self.max_line]
            lines = [p for p in lines if len(p) <= self.max_line]
        if len(rest) > self.max_line:
            over.append(rest[:KEEP_RAW])
            self.discarded_bytes += len(rest)
            self._discarding = True
            rest = b""
        self._buf = rest
        return lines, over

    def flush(self) -> bytes:
        """Return and forget the partial line waiting for its line end."""
        rest, self._buf = self._buf, b""
        self._discarding = False
        self._after_cr = False
        return rest
