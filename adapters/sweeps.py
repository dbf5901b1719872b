"""Pure parsing of probe I-V sweeps (CSV rows, a JSON frame, a text line, a binary header + columns) into SweepBlocks.

Nothing here raises on bad data: every parser returns blocks and/or
Rejections (reason tokens ``bad_json``, ``malformed``, ``length_mismatch``,
``bad_binary_header``, ``bad_dtype``, ``size_mismatch``, ``oversized``,
``duplicate_sweep``). Checks of the sweep's shape (too few points, NaN,
non-monotonic or repeated bias, clipped rail) belong to the analysis
(monitor.diagnostics.probe_quality), which refuses such sweeps by reason.

Formats (documented in the README):

- CSV with a header row naming at least ``sweep``, ``t``, ``V``, ``I`` (any
  order, extra columns ignored, ``#`` lines skipped); one row per point,
  the points of a sweep on consecutive rows. A sweep's time is the middle of
  its first and last point's ``t``.
- JSON frame ``{"sweep": 12, "t": 1.25, "V": [...], "I": [...]}``.
- Text line ``sweep=12 t=1.25 V=-20,-19.9,... I=-1e-4,...``.
- Binary: a JSON header ``{"layout": "sweeps", "n": N, "count": K, "sweep":
  first id, "t": [K times] or one time, "dtype": "<f8"}`` and a payload of
  K x N bias values then K x N currents (row-major).
"""

from __future__ import annotations

import io
import json
import math
from dataclasses import dataclass

import numpy as np

from adapters.batch import Rejection
from adapters.framing import DTYPES, KEEP_RAW, MAX_FRAME, MAX_HEADER, refuse_constant, reject

__all__ = ["SweepBlock", "parse_sweep_csv", "parse_sweep_json", "parse_sweep_line", "parse_sweep_binary",
           "encode_sweep_binary", "blocks_from_rows", "MAX_POINTS", "REASONS"]

MAX_POINTS = 100_000          # points in one sweep
REASONS = ("bad_json", "malformed", "length_mismatch", "bad_binary_header", "bad_dtype", "size_mismatch",
           "oversized", "duplicate_sweep")
_COLUMNS = ("sweep", "t", "V", "I")


@dataclass(frozen=True, eq=False)
class SweepBlock:
    """Sweeps of equal length: ``sweep`` ids (int64, S), ``t`` (s, S), ``V`` bias (V) and ``I`` current (A), S x N."""

    source: str
    sweep: np.ndarray
    t: np.ndarray
    V: np.ndarray
    I: np.ndarray

    def __post_init__(self) -> None:
        if self.V.shape != self.I.shape or self.V.ndim != 2 or len(self.sweep) != len(self.t) != self.V.shape[0]:
            raise ValueError(f"sweep block shapes disagree: V {self.V.shape}, I {self.I.shape}, {len(self.sweep)} ids")

    def __len__(self) -> int:
        return len(self.sweep)


def _one(source: str, sweep: int, t: float, V: np.ndarray, I: np.ndarray) -> SweepBlock:
    return SweepBlock(source, np.array([sweep], dtype=np.int64), np.array([t], dtype=np.float64),
                      V.reshape(1, -1), I.reshape(1, -1))


def blocks_from_rows(source: str, ids: np.ndarray, t: np.ndarray, V: np.ndarray, I: np.ndarray,
                     received: float) -> tuple[list[SweepBlock], list[Rejection]]:
    """Group point rows (consecutive equal ``ids`` form a sweep) into blocks of equal length.

    A sweep id that comes back after another sweep is refused (``duplicate_sweep``).
    """
    if len(ids) == 0:
        return [], []
    cut = np.flatnonzero(np.diff(ids) != 0) + 1
    starts = np.concatenate([[0], cut])
    lengths = np.diff(np.concatenate([starts, [len(ids)]]))
    sid = ids[starts]
    _, first = np.unique(sid, return_index=True)
    dup = np.ones(len(sid), dtype=bool)
    dup[first] = False
    rejections = [reject(source, "duplicate_sweep", f"sweep={int(sid[k])}".encode(), received,
                         f"sweep {int(sid[k])} came back after other sweeps ({int(lengths[k])} points refused)")
                  for k in np.flatnonzero(dup)]
    blocks: list[SweepBlock] = []
    keep = ~dup
    for n in np.unique(lengths[keep]):
        sel = np.flatnonzero(keep & (lengths == n))
        idx = starts[sel][:, None] + np.arange(n)[None, :]
        tt = 0.5 * (t[idx[:, 0]] + t[idx[:, -1]])
        blocks.append(SweepBlock(source, sid[sel].astype(np.int64), tt, V[idx], I[idx]))
    blocks.sort(key=lambda b: int(b.sweep[0]))
    return blocks, rejections


def _header(lines: list[bytes]) -> tuple[int, list[str]] | None:
    for k, line in enumerate(lines):
        text = line.strip()
        if text and not text.startswith(b"#"):
            return k, [c.strip().decode("utf-8", "replace") for c in text.split(b",")]
    return None


def parse_sweep_csv(data: bytes, source: str, received: float) -> tuple[list[SweepBlock], list[Rejection]]:
    """Sweeps from CSV bytes (header row with sweep, t, V, I). Unreadable rows are refused
    (``malformed``, the row kept); a value that reads but is not finite stays NaN for the analysis to refuse."""
    lines = data.split(b"\n")
    found = _header(lines)
    if found is None:
        return [], [reject(source, "malformed", data[:KEEP_RAW], received, "no header row")]
    k, names = found
    missing = [c for c in _COLUMNS if c not in names]
    if missing:
        return [], [reject(source, "malformed", lines[k], received, f"header lacks column(s) {', '.join(missing)}")]
    use = [names.index(c) for c in _COLUMNS]
    body = [ln.rstrip(b"\r") for ln in lines[k + 1:] if ln.strip() and not ln.lstrip().startswith(b"#")]
    rejections: list[Rejection] = []
    if not body:
        return [], rejections
    try:
        arr = np.loadtxt(io.BytesIO(b"\n".join(body)), delimiter=",", usecols=use, ndmin=2, dtype=np.float64)
        if arr.shape[1] != 4:
            raise ValueError("columns")
    except ValueError:
        rows: list[list[float]] = []
        for ln in body:                                   # slow path only for a damaged file
            cells = ln.split(b",")
            try:
                row = [float(cells[i]) for i in use]
            except (ValueError, IndexError):
                rejections.append(reject(source, "malformed", ln, received, "row does not read as numbers"))
                continue
            rows.append(row)
        arr = np.array(rows, dtype=np.float64).reshape(-1, 4)
    ok = np.isfinite(arr[:, 0]) & (arr[:, 0] == np.round(arr[:, 0]))
    for r in arr[~ok]:
        rejections.append(reject(source, "malformed", ",".join(map(str, r)).encode(), received, "bad sweep id"))
    arr = arr[ok]
    blocks, dup = blocks_from_rows(source, arr[:, 0].astype(np.int64), arr[:, 1], arr[:, 2], arr[:, 3], received)
    return blocks, rejections + dup


def _arrays(source: str, raw: bytes, received: float, obj: object) -> SweepBlock | Rejection:
    if not isinstance(obj, dict) or not {"V", "I"} <= set(obj):
        return reject(source, "malformed", raw, received, "needs V and I arrays (sweep, t optional)")
    v, i = obj["V"], obj["I"]
    if not isinstance(v, list) or not isinstance(i, list):
        return reject(source, "malformed", raw, received, "V and I must be arrays of numbers")
    if len(v) != len(i):
        return reject(source, "length_mismatch", raw, received, f"V has {len(v)} points, I has {len(i)}")
    if len(v) > MAX_POINTS:
        return reject(source, "oversized", raw, received, f"{len(v)} points > {MAX_POINTS}")
    try:
        V = np.array(v, dtype=np.float64)
        I = np.array(i, dtype=np.float64)
    except (TypeError, ValueError):
        return reject(source, "malformed", raw, received, "V and I must be arrays of numbers")
    sweep, t = obj.get("sweep", -1), obj.get("t", received)
    if isinstance(sweep, bool) or not isinstance(sweep, int) or isinstance(t, bool) or not isinstance(t, (int, float)):
        return reject(source, "malformed", raw, received, "sweep must be an integer and t a number")
    if not math.isfinite(float(t)) or not -2**62 <= sweep < 2**62:
        return reject(source, "malformed", raw, received, "sweep or t out of range")
    return _one(source, sweep, float(t), V, I)


def parse_sweep_json(frame: bytes, source: str, received: float) -> SweepBlock | Rejection:
    """One sweep from a JSON frame ``{"sweep": id, "t": s, "V": [...], "I": [...]}`` (NaN/Infinity refused)."""
    if len(frame) > MAX_FRAME:
        return reject(source, "oversized", frame, received, f"{len(frame)} bytes")
    try:
        obj = json.loads(frame, parse_constant=refuse_constant)
    except (ValueError, RecursionError) as exc:
        return reject(source, "bad_json", frame, received, str(exc)[:80])
    return _arrays(source, frame, received, obj)


def parse_sweep_line(line: bytes, source: str, received: float) -> SweepBlock | Rejection:
    """One sweep from a text line ``sweep=12 t=1.25 V=v1,v2,... I=i1,i2,...`` (pairs split by spaces)."""
    if len(line) > MAX_POINTS * 32:
        return reject(source, "oversized", line, received, f"{len(line)} bytes")
    fields: dict[str, str] = {}
    for part in line.decode("utf-8", "replace").split("#", 1)[0].split():
        key, sep, value = part.partition("=")
        if not sep or key in fields or key not in _COLUMNS:
            return reject(source, "malformed", line, received, f"expected sweep=, t=, V=, I= pairs; got {part[:40]!r}")
        fields[key] = value
    try:
        obj: dict[str, object] = {"V": [float(x) for x in fields["V"].split(",")],
                                  "I": [float(x) for x in fields["I"].split(",")]}
        if "sweep" in fields:
            obj["sweep"] = int(fields["sweep"])
        if "t" in fields:
            obj["t"] = float(fields["t"])
    except (KeyError, ValueError):
        return reject(source, "malformed", line, received, "needs V= and I= lists of numbers")
    return _arrays(source, line, received, obj)


def parse_sweep_binary(header: bytes, payload: bytes, source: str, received: float) -> SweepBlock | Rejection:
    """K sweeps of N points: header ``{"layout": "sweeps", "n": N, "count": K, "sweep": first, "t": ...,
    "dtype": "<f8"}``; payload K*N biases then K*N currents."""
    raw = bytes(header) + b"\n" + bytes(payload[:KEEP_RAW])
    if len(header) > MAX_HEADER or len(payload) > MAX_FRAME:
        return reject(source, "oversized", raw, received, f"header {len(header)} B, payload {len(payload)} B")
    try:
        h = json.loads(header, parse_constant=refuse_constant)
    except (ValueError, RecursionError) as exc:
        return reject(source, "bad_binary_header", raw, received, f"header is not JSON: {str(exc)[:80]}")
    allowed = {"layout", "n", "count", "sweep", "t", "dtype"}
    if not isinstance(h, dict) or h.get("layout") != "sweeps" or set(h) - allowed or "n" not in h:
        return reject(source, "bad_binary_header", raw, received, 'needs layout "sweeps" and n (count, sweep, t, dtype)')
    n, count, first, dtype = h["n"], h.get("count", 1), h.get("sweep", 0), h.get("dtype", "<f8")
    if any(type(x) is not int or x < 0 for x in (n, count, first)) or n > MAX_POINTS or count == 0:
        return reject(source, "bad_binary_header", raw, received, "n, count, sweep must be non-negative integers")
    if not isinstance(dtype, str) or dtype not in DTYPES or dtype[1] == "i":
        return reject(source, "bad_dtype", raw, received, "dtype must be one of <f8 >f8 <f4 >f4")
    t = h.get("t", received)
    times = np.asarray(t if isinstance(t, list) else [t] * count)
    if times.shape != (count,) or times.dtype.kind not in "if" or not np.isfinite(times).all():
        return reject(source, "bad_binary_header", raw, received, "t must be a number or one number per sweep")
    dt = np.dtype(dtype)
    if len(payload) != 2 * count * n * dt.itemsize:
        return reject(source, "size_mismatch", raw, received,
                      f"payload {len(payload)} B, header says 2 x {count} x {n} x {dt.itemsize} B")
    data = np.frombuffer(payload, dtype=dt).astype(np.float64).reshape(2, count, n)
    return SweepBlock(source, np.arange(first, first + count, dtype=np.int64), times.astype(np.float64),
                      data[0].copy(), data[1].copy())


def encode_sweep_binary(block: SweepBlock, dtype: str = "<f8") -> tuple[bytes, bytes]:
    """(header, payload) of a block in the binary layout (ids must be consecutive)."""
    h = {"layout": "sweeps", "n": int(block.V.shape[1]), "count": len(block), "sweep": int(block.sweep[0]),
         "t": [float(x) for x in block.t], "dtype": dtype}
    payload = np.concatenate([block.V.ravel(), block.I.ravel()]).astype(dtype).tobytes()
    return json.dumps(h).encode(), payload

