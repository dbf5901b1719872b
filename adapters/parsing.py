"""Pure parsers for our wire formats: text lines and JSON frames here, binary batches and the line framer re-exported."""

from __future__ import annotations

import json
import math
from dataclasses import dataclass
from itertools import chain
from typing import Iterable, Sequence

import numpy as np

from adapters.batch import Batch, Rejection
from adapters.framing import (DTYPES, KEEP_RAW, KEY, MAX_FRAME, MAX_HEADER, MAX_JSON, MAX_LINE, REASONS, RESERVED, SEQ_MAX,
                              T_LIMIT, LineFramer, refuse_constant, parse_binary_batch, text_reject)

__all__ = [
    "MAX_LINE", "MAX_FRAME", "MAX_HEADER", "KEEP_RAW", "DTYPES", "REASONS",
    "Parsed", "LineFramer", "parse_text_line", "parse_text_lines",
    "parse_json_frame", "parse_json_frames", "parse_binary_batch", "merge_batches",
]

_KEY, _RESERVED, _SEQ_MAX, _reject = KEY, RESERVED, SEQ_MAX, text_reject


@dataclass(frozen=True)
class Parsed:
    """What a group of lines or frames became: batches in arrival order, rejections, skipped count.

    ``skipped`` counts blank and comment-only lines: they carry no reading and
    are not errors. For any input, ``readings + len(rejections) + skipped``
    equals the number of lines (or frames) given.
    """

    batches: tuple[Batch, ...]
    rejections: tuple[Rejection, ...]
    skipped: int = 0

    @property
    def readings(self) -> int:
        return sum(len(b) for b in self.batches)


# ----------------------------------------------------------------------------- segments and merging

@dataclass(frozen=True)
class _Segment:
    keys: tuple[str, ...]          # channel keys (t and seq excluded)
    values: np.ndarray             # (m, len(keys)) float64
    t: np.ndarray | None           # data time, or None: receive time
    seq: np.ndarray | None


def _segments_to_batches(segs: list[_Segment], source: str, received: float) -> list[Batch]:
    """Join consecutive segments that agree on (has t, has seq) into one Batch each, NaN-filling keys."""
    out: list[Batch] = []
    i = 0
    while i < len(segs):
        j = i + 1
        while j < len(segs) and (segs[j].t is None) == (segs[i].t is None) and (segs[j].seq is None) == (segs[i].seq is None):
            j += 1
        run = segs[i:j]
        n = sum(len(s.values) for s in run)
        keys: dict[str, None] = {}
        for s in run:
            keys.update(dict.fromkeys(s.keys))
        cols = {k: np.full(n, np.nan) for k in keys}
        pos = 0
        for s in run:
            m = len(s.values)
            for c, k in enumerate(s.keys):
                cols[k][pos:pos + m] = s.values[:, c]
            pos += m
        from_source = run[0].t is not None
        t = np.concatenate([s.t for s in run]) if from_source else np.full(n, received)  # type: ignore[misc]
        seq = np.concatenate([s.seq for s in run]) if run[0].seq is not None else None  # type: ignore[misc]
        out.append(Batch(source=source, t=t, columns=cols, seq=seq, t_from_source=from_source))
        i = j
    return out


def merge_batches(batches: Sequence[Batch], max_len: int = 262_144) -> list[Batch]:
    """Concatenate consecutive batches of one source that agree on time origin and seq presence.

    A merged batch grows to at most ``max_len`` readings (a longer input batch is kept whole).
    Keys missing from some of them become NaN there; sigma columns are kept
    only where every merged batch carries them (otherwise that run is not merged).
    """
    out: list[Batch] = []
    run: list[Batch] = []
    run_len = [0]

    def flush() -> None:
        run_len[0] = 0
        if len(run) == 1:
            out.append(run[0])
        elif run:
            n = sum(len(b) for b in run)
            keys: dict[str, None] = {}
            for b in run:
                keys.update(dict.fromkeys(b.columns))
            cols = {k: np.concatenate([b.columns[k] if k in b.columns else np.full(len(b), np.nan) for b in run]) for k in keys}
            sig = {k: np.concatenate([b.sigma[k] for b in run]) for k in run[0].sigma}
            seq = np.concatenate([b.seq for b in run]) if run[0].seq is not None else None  # type: ignore[misc]
            t = np.concatenate([b.t for b in run])
            assert len(t) == n
            out.append(Batch(source=run[0].source, t=t, columns=cols, sigma=sig, seq=seq, t_from_source=run[0].t_from_source))
        run.clear()

    for b in batches:
        if len(b) == 0:
            continue
        if run:
            r = run[0]
            if (run_len[0] + len(b) > max_len or b.source != r.source or b.t_from_source != r.t_from_source or (b.seq is None) != (r.seq is None)
                    or set(b.sigma) != set(r.sigma)):
                flush()
        run.append(b)
        run_len[0] += len(b)
    flush()
    return out


# ----------------------------------------------------------------------------- text lines

_SigInfo = tuple[str | None, str, tuple[str, ...], int, int]   # reason|None, detail, channel keys, t index, seq index
_sig_cache: dict[tuple[bytes, ...], _SigInfo] = {}


def _signature(keys: tuple[bytes, ...]) -> _SigInfo:
    """Validate a line's key layout once per distinct layout (cached)."""
    got = _sig_cache.get(keys)
    if got is not None:
        return got
    names: list[str] = []
    reason: str | None = None
    detail = ""
    for k in keys:
        s = k.decode("ascii", "replace")
        if not _KEY.match(s):
            reason, detail = ("malformed", "empty key") if not k else ("bad_key", f"key {s!r} is not a name")
            break
        names.append(s)
    if reason is None and len(set(names)) != len(names):
        reason, detail = "duplicate_key", "a key appears twice"
    chan = tuple(n for n in names if n not in _RESERVED)
    if reason is None and not chan:
        reason, detail = "no_values", "no channel values"
    ti = names.index("t") if reason is None and "t" in names else -1
    si = names.index("seq") if reason is None and "seq" in names else -1
    info: _SigInfo = (reason, detail, chan, ti, si)
    if len(_sig_cache) > 4096:
        _sig_cache.clear()
    _sig_cache[keys] = info
    return info


def _line_fallback(line: bytes, vals: list[bytes], ti: int, si: int) -> tuple[str, str] | tuple[list[float], int | None]:
    """Slow path for one line whose group failed to convert: find the exact reason."""
    nums: list[float] = []
    seq: int | None = None
    for i, v in enumerate(vals):
        if i == si:
            try:
                seq = int(v)
            except ValueError:
                return "bad_seq", f"seq {v[:40]!r} is not an integer"
            if not 0 <= seq <= _SEQ_MAX:
                return "bad_seq", "seq out of range"
            nums.append(0.0)
            continue
        try:
            nums.append(float(v))
        except ValueError:
            return ("bad_time", f"t {v[:40]!r} is not a number") if i == ti else ("bad_value", f"{v[:40]!r} is not a number")
    return nums, seq


def _at(seqs: np.ndarray | None, i: int) -> int | None:
    return None if seqs is None else int(seqs[i])


def parse_text_lines(lines: Iterable[bytes], source: str, received: float, *, max_line: int = MAX_LINE) -> Parsed:
    """Parse many text lines (line ends already removed) into batches, one per run of lines alike.

    Format: ``key=value`` pairs separated by spaces and/or commas; ``t=`` is the
    data time in seconds, ``seq=`` a non-negative integer; ``#`` starts a comment.
    Lines with the same key layout are converted together (one float pass over
    all their values); a group that fails is re-parsed line by line to find the
    reason. Non-finite values (nan, inf) are refused (``not_finite``): NaN in a
    batch means "not carried", so a sent NaN would otherwise vanish silently.
    """
    rejects: list[Rejection] = []
    segs: list[_Segment] = []
    skipped = 0
    group_key: tuple[bytes, ...] | None = None
    rows: list[list[bytes]] = []
    raws: list[bytes] = []

    def close_group() -> None:
        if group_key is None or not rows:
            return
        _, _, chan, ti, si = _signature(group_key)
        k = len(group_key)
        m = len(rows)
        seqs: np.ndarray | None = None
        seq_raw = [r[si] for r in rows] if si >= 0 else []
        try:
            if si >= 0:
                seqs = np.fromiter(map(int, seq_raw), dtype=np.int64, count=m)
                for r in rows:
                    r[si] = b"0"
            arr = np.fromiter(map(float, chain.from_iterable(rows)), dtype=np.float64, count=m * k).reshape(m, k)
            ok = np.ones(m, dtype=bool)
        except (ValueError, OverflowError):
            arr = np.zeros((m, k))
            ok = np.ones(m, dtype=bool)
            seqs = np.zeros(m, dtype=np.int64) if si >= 0 else None
            for i, (raw, r) in enumerate(zip(raws, rows)):
                if si >= 0:
                    r[si] = seq_raw[i]
                res = _line_fallback(raw, r, ti, si)
                if isinstance(res[0], str):
                    rejects.append(_reject(source, res[0], raw, received, str(res[1])))
                    ok[i] = False
                else:
                    arr[i] = res[0]
                    if seqs is not None:
                        seqs[i] = res[1]
        if seqs is not None:
            bad_seq = ok & (seqs < 0)
            for i in np.flatnonzero(bad_seq).tolist():
                rejects.append(_reject(source, "bad_seq", raws[i], received, "seq is negative"))
            ok &= ~bad_seq
        chan_idx = [i for i in range(k) if i != ti and i != si]
        vals = arr[:, chan_idx]
        if ti >= 0:
            bad_t = ok & ~(np.abs(arr[:, ti]) <= T_LIMIT)          # NaN fails too
            for i in np.flatnonzero(bad_t).tolist():
                rejects.append(_reject(source, "bad_time", raws[i], received,
                                       f"t is not finite or beyond {T_LIMIT:g} s", seq=_at(seqs, i)))
            ok &= ~bad_t
        bad_v = ok & ~np.isfinite(vals).all(axis=1)
        for i in np.flatnonzero(bad_v).tolist():
            rejects.append(_reject(source, "not_finite", raws[i], received, "a value is nan or inf", seq=_at(seqs, i)))
        ok &= ~bad_v
        if ok.all():
            segs.append(_Segment(chan, vals, arr[:, ti] if ti >= 0 else None, seqs))
        elif ok.any():
            segs.append(_Segment(chan, vals[ok], arr[ok, ti] if ti >= 0 else None, seqs[ok] if seqs is not None else None))

    for line in lines:
        if len(line) > max_line:
            rejects.append(_reject(source, "oversized", line, received, f"line longer than {max_line} bytes"))
            continue
        body = line.split(b"#", 1)[0] if b"#" in line else line
        toks = body.replace(b",", b" ").split()
        if not toks:
            skipped += 1
            continue
        pairs = [tok.split(b"=") for tok in toks]
        if any(len(p) != 2 for p in pairs):
            rejects.append(_reject(source, "malformed", line, received, "expected key=value pairs"))
            continue
        keys = tuple(p[0] for p in pairs)
        reason, detail, *_ = _signature(keys)
        if reason is not None:
            rejects.append(_reject(source, reason, line, received, detail))
            continue
        if keys != group_key:
            close_group()
            group_key, rows, raws = keys, [], []
        rows.append([p[1] for p in pairs])
        raws.append(line)
    close_group()
    return Parsed(tuple(_segments_to_batches(segs, source, received)), tuple(rejects), skipped)


def parse_text_line(line: bytes, source: str, received: float, *, max_line: int = MAX_LINE) -> Batch | Rejection:
    """One text line: a Batch of one reading, an empty Batch for a blank/comment line, or a Rejection."""
    p = parse_text_lines([line], source, received, max_line=max_line)
    if p.rejections:
        return p.rejections[0]
    return p.batches[0] if p.batches else Batch.empty(source)


# ----------------------------------------------------------------------------- JSON frames

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
    segs: list[_Segment] = []
    cur: tuple[tuple[str, ...], bool, bool] | None = None
    rows: list[list[float]] = []
    ts: list[float] = []
    seqs: list[int] = []

    def close() -> None:
        if cur is None or not rows:
            return
        keys, has_t, has_seq = cur
        segs.append(_Segment(keys, np.array(rows, dtype=np.float64).reshape(len(rows), len(keys)),
                             np.array(ts, dtype=np.float64) if has_t else None,
                             np.array(seqs, dtype=np.int64) if has_seq else None))

    for frame in frames:
        res = _json_row(frame, max_frame)
        if isinstance(res[0], str):
            rejects.append(_reject(source, res[0], frame, received, str(res[1]), seq=res[2]))  # type: ignore[misc]
            continue
        keys, vals, t, seq = res  # type: ignore[misc]
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
    return Parsed(tuple(_segments_to_batches(segs, source, received)), tuple(rejects))


def parse_json_frame(frame: bytes, source: str, received: float, *, max_frame: int = MAX_FRAME) -> Batch | Rejection:
    """One JSON frame: a Batch of one reading, or a Rejection."""
    p = parse_json_frames([frame], source, received, max_frame=max_frame)
    return p.rejections[0] if p.rejections else p.batches[0]


