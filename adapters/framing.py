"""Cutting bytes into records: a stream into lines (LineFramer) and a binary batch's header + payload."""

from __future__ import annotations

import json
import re

import numpy as np

from adapters.batch import Batch, Rejection

__all__ = ["MAX_LINE", "MAX_FRAME", "MAX_HEADER", "MAX_FIELDS", "KEEP_RAW", "DTYPES", "REASONS",
           "LineFramer", "parse_binary_batch", "reject", "refuse_constant", "KEY", "RESERVED", "SEQ_MAX"]

MAX_LINE = 4096                 # bytes in one text line (without the line end)
MAX_FRAME = 16 * 1024 * 1024    # bytes in one ZeroMQ frame or binary payload
MAX_HEADER = 64 * 1024          # bytes in a binary batch's JSON header
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


def reject(source: str, reason: str, raw: bytes, received: float, detail: str = "") -> Rejection:
    """A Rejection keeping at most KEEP_RAW bytes of the input (the detail says how long it was)."""
    if len(raw) > KEEP_RAW:
        detail = f"{detail}; {len(raw)} bytes, first {KEEP_RAW} kept".lstrip("; ")
        raw = raw[:KEEP_RAW]
    return Rejection(source=source, reason=reason, raw=bytes(raw), received=received, detail=detail)


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
    if len(header) > MAX_HEADER or len(payload) > max_frame:
        return reject(source, "oversized", raw, received, f"header {len(header)} B, payload {len(payload)} B")
    try:
        h = json.loads(header, parse_constant=refuse_constant)
    except (ValueError, RecursionError) as exc:
        return reject(source, "bad_binary_header", raw, received, f"header is not JSON: {str(exc)[:80]}")
    if not isinstance(h, dict) or set(h) - {"fields", "n", "seq", "dtype"} or "fields" not in h or "n" not in h:
        return reject(source, "bad_binary_header", raw, received, "header needs fields and n (seq, dtype optional), nothing else")
    fields, n, seq, dtype = h["fields"], h["n"], h.get("seq"), h.get("dtype", "<f8")
    if (not isinstance(fields, list) or not 1 <= len(fields) <= MAX_FIELDS
            or not all(isinstance(f, str) and KEY.match(f) and f != "seq" for f in fields)
            or len(set(fields)) != len(fields) or not [f for f in fields if f != "t"]):
        return reject(source, "bad_binary_header", raw, received, "fields must be distinct names with a channel")
    if type(n) is not int or n < 0:
        return reject(source, "bad_binary_header", raw, received, "n must be a non-negative integer")
    if seq is not None and (type(seq) is not int or not 0 <= seq <= SEQ_MAX - n):
        return reject(source, "bad_seq", raw, received, "seq must be a non-negative integer")
    if not isinstance(dtype, str) or dtype not in DTYPES:
        return reject(source, "bad_dtype", raw, received, f"dtype must be one of {sorted(DTYPES)}")
    dt = np.dtype(dtype)
    if len(payload) != n * len(fields) * dt.itemsize:
        return reject(source, "size_mismatch", raw, received,
                       f"payload {len(payload)} B, header says {n} x {len(fields)} x {dt.itemsize} B")
    data = np.frombuffer(payload, dtype=dt).reshape(len(fields), n).astype(np.float64)   # a copy, native order
    cols = {f: data[i] for i, f in enumerate(fields) if f != "t"}
    has_t = "t" in fields
    t = data[fields.index("t")] if has_t else np.full(n, received)
    seqs = np.arange(seq, seq + n, dtype=np.int64) if seq is not None else None
    return Batch(source=source, t=t, columns=cols, seq=seqs, t_from_source=has_t)


# ----------------------------------------------------------------------------- stream framing

class LineFramer:
    """Split a byte stream into lines at LF (a CR before it is dropped), keeping partial lines across feeds.

    A line longer than ``max_line`` is refused once (its first KEEP_RAW bytes
    kept); the rest of it is skipped up to its line end. ``flush()`` hands
    back a pending partial line (e.g. when the link drops mid-line).
    """

    def __init__(self, max_line: int = MAX_LINE) -> None:
        self.max_line = max_line
        self._buf = b""
        self._discarding = False
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
        if self._discarding:
            cut = data.find(b"\n")
            if cut < 0:
                self.discarded_bytes += len(data)
                return [], over
            self.discarded_bytes += cut
            data = data[cut + 1:]
            self._discarding = False
        buf = self._buf + data if self._buf else data
        parts = buf.split(b"\n")
        rest = parts.pop()
        lines = [p[:-1] if p.endswith(b"\r") else p for p in parts]
        if lines and max(map(len, lines)) > self.max_line:
            over = [p[:KEEP_RAW] for p in lines if len(p) > self.max_line]
            lines = [p for p in lines if len(p) <= self.max_line]
        if len(rest) > self.max_line + 1:          # +1: room for a CR still to be followed by LF
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
        return rest
