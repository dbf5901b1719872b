"""The JSON-frame parser: one object per reading, duplicate keys and implausible times refused, seq kept on refusal."""

from __future__ import annotations

import json
import math
from typing import Iterable

import numpy as np

from adapters.batch import Batch, Rejection
from adapters.framing import KEY, MAX_FRAME, MAX_JSON, RESERVED, SEQ_MAX, T_LIMIT, refuse_constant, text_reject
from adapters.segments import Parsed, Segment, segments_to_batches

__all__ = ["parse_json_frames", "parse_json_frame"]

_KEY, _RESERVED, _SEQ_MAX, _reject = KEY, RESERVED, SEQ_MAX, text_reject

_JSON = json.JSONDecoder(parse_constant=refuse_constant)


class _DuplicateKey(ValueError):
    pass


def _no_duplicates(pairs: list[tuple[str, object]]) -> dict[str, object]:
    out = dict(pairs)
    if len(out) != len(pairs):
        seen: set[str] = set()
        dup = next(k for k, _ in pairs if k in seen or seen.add(k))  # type: ignore[func-returns-value]
        raise _DuplicateKey(f"key {dup[:40]!r} appears twice")
    return out


_JSON_STRICT = json.JSONDecoder(parse_constant=refuse_constant, object_pairs_hook=_no_duplicates)
_json_keys: dict[tuple[str, ...], tuple[str, ...] | None] = {}


def _json_fast(obj: dict) -> tuple[tuple[str, ...], list[float], float | None, int | None] | None:
    """The common case (known-good key layout, plain finite numbers); None sends it to the careful path."""
    keys = tuple(obj)
    chan = _json_keys.get(keys, ())
    if chan == ():
        ok = all(_KEY.match(k) for k in keys) and any(k not in _RESERVED for k in keys)
        chan = tuple(k for k in keys if k not in _RESERVED) if ok else None
        if len(_json_keys) > 4096:
            _json_keys.clear()
        _json_keys[keys] = chan
    if chan is None:
        return None
    vals = [obj[k] for k in chan]
    t, seq = obj.get("t"), obj.get("seq")
    try:
        if not all((type(v) is float or type(v) is int) and math.isfinite(v) for v in vals):
            return None
        if t is not None and not ((type(t) is float or type(t) is int) and abs(t) <= T_LIMIT):
            return None
    except OverflowError:
        return None
    if seq is not None and (type(seq) is not int or not 0 <= seq <= _SEQ_MAX):
        return None
    return chan, vals, (None if t is None else float(t)), seq


_Row = tuple[tuple[str, ...], list[float], float | None, int | None]


def _json_row(frame: bytes, max_frame: int) -> tuple[str, str, int | None] | _Row:
    """A frame's reading (keys, values, t, seq), or (reason, detail, the seq it showed)."""
    if len(frame) > min(max_frame, MAX_JSON):
        return "oversized", f"JSON reading longer than {min(max_frame, MAX_JSON)} bytes", None
    try:
        text = bytes(frame).decode("utf-8")
        obj = _JSON.decode(text)
    except ValueError as exc:                      # JSONDecodeError, UnicodeDecodeError, NaN/Infinity
        reason = "not_finite" if "non-finite" in str(exc) else "bad_json"
        return reason, str(exc)[:120], None
    except RecursionError:
        return "bad_json", "nested too deeply", None
    if type(obj) is dict:
        # a flat object of numbers has one comma fewer than keys; anything else is checked key by key
        if frame.count(b",") + 1 == len(obj):
            fast = _json_fast(obj)
            if fast is not None:
                return fast
        try:
            _JSON_STRICT.decode(text)
        except _DuplicateKey as exc:
            return "duplicate_key", str(exc), None
        except (ValueError, RecursionError):
            pass
        res = _json_careful(obj)
        if isinstance(res[0], str):
            seq = obj.get("seq")
            return res[0], str(res[1]), seq if type(seq) is int and 0 <= seq <= _SEQ_MAX else None
        return res
    return "bad_json", "a reading must be a JSON object", None


def _json_careful(obj: dict) -> tuple[str, str] | _Row:
    """One decoded object, key by key: the reading, or the first reason it is refused."""
    if not isinstance(obj, dict):
        return "bad_json", "a reading must be a JSON object"
    t: float | None = None
    seq: int | None = None
    keys: list[str] = []
    vals: list[float] = []
    for k, v in obj.items():
        if not _KEY.match(k):
            return "bad_key", f"key {k[:40]!r} is not a name"
        if k == "seq":
            if v is None:
                continue
            if type(v) is not int or not 0 <= v <= _SEQ_MAX:
                return "bad_seq", "seq must be a non-negative integer"
            seq = v
            continue
        if v is None:
            continue                              # null: this reading does not carry the key
        if type(v) not in (int, float):
            return ("bad_time" if k == "t" else "bad_value"), f"{k}: not a number"
        try:
            f = float(v)
        except OverflowError:
            f = float("inf")
        if not np.isfinite(f):
            return ("bad_time" if k == "t" else "not_finite"), f"{k}: not finite"
        if k == "t":
            if abs(f) > T_LIMIT:
                return "bad_time", f"t beyond {T_LIMIT:g} s"
            t = f
        else:
            keys.append(k)
            vals.append(f)
    if not keys:
        return "no_values", "no channel values"
    return tuple(keys), vals, t, seq


def parse_json_frames(frames: Iterable[bytes], source: str, received: float, *, max_frame: int = MAX_FRAME) -> Parsed:
    """Parse JSON frames, each one object ``{"t": 1.25, "seq": 17, "ne": 3.1e17, ...}``.

    ``t`` and ``seq`` are optional; values must be finite numbers; ``null``
    means the reading does not carry that key. Consecutive frames with the
    same keys are built into columns together.
    """
    rejects: list[Rejection] = []
    segs: list[Segment] = []
    cur: tuple[tuple[str, ...], bool, bool] | None = None
    rows: list[list[float]] = []
    ts: list[float] = []
    seqs: list[int] = []

    def close() -> None:
        if cur is None or not rows:
            return
        keys, has_t, has_seq = cur
        segs.append(Segment(keys, np.array(rows, dtype=np.float64).reshape(len(rows), len(keys)),
                             np.array(ts, dtype=np.float64) if has_t else None,
                             np.array(seqs, dtype=np.int64) if has_seq else None))

    for frame in frames:
        res = _json_row(frame, max_frame)
        if isinstance(res[0], str):
            rejects.append(_reject(source, res[0], frame, received, str(res[1]), seq=res[2]))
            continue
        keys, vals, t, seq = res
        sig = (keys, t is not None, seq is not None)
        if sig != cur:
            close()
            cur, rows, ts, seqs = sig, [], [], []
        rows.append(vals)
        if t is not None:
            ts.append(t)
        if seq is not None:
            seqs.append(seq)
    close()
    return Parsed(tuple(segments_to_batches(segs, source, received)), tuple(rejects))


def parse_json_frame(frame: bytes, source: str, received: float, *, max_frame: int = MAX_FRAME) -> Batch | Rejection:
    """One JSON frame: a Batch of one reading, or a Rejection."""
    p = parse_json_frames([frame], source, received, max_frame=max_frame)
    return p.rejections[0] if p.rejections else p.batches[0]


