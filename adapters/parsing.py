"""Pure parsers for our wire formats: text lines here; JSON frames, binary batches, the line framer re-exported."""

from __future__ import annotations

from itertools import chain
from typing import Iterable

import numpy as np

from adapters.batch import Batch, Rejection
from adapters.framing import (DTYPES, KEEP_RAW, KEY, MAX_FRAME, MAX_HEADER, MAX_LINE, REASONS, RESERVED, SEQ_MAX,
                              T_LIMIT, LineFramer, parse_binary_batch, text_reject)
from adapters.json_frames import parse_json_frame, parse_json_frames
from adapters.segments import Parsed, Segment, merge_batches, segments_to_batches

__all__ = [
    "MAX_LINE", "MAX_FRAME", "MAX_HEADER", "KEEP_RAW", "DTYPES", "REASONS",
    "Parsed", "LineFramer", "parse_text_line", "parse_text_lines",
    "parse_json_frame", "parse_json_frames", "parse_binary_batch", "merge_batches",
]

_KEY, _RESERVED, _SEQ_MAX, _reject = KEY, RESERVED, SEQ_MAX, text_reject


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
    segs: list[Segment] = []
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
            segs.append(Segment(chan, vals, arr[:, ti] if ti >= 0 else None, seqs))
        elif ok.any():
            segs.append(Segment(chan, vals[ok], arr[ok, ti] if ti >= 0 else None, seqs[ok] if seqs is not None else None))

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
    return Parsed(tuple(segments_to_batches(segs, source, received)), tuple(rejects), skipped)


def parse_text_line(line: bytes, source: str, received: float, *, max_line: int = MAX_LINE) -> Batch | Rejection:
    """One text line: a Batch of one reading, an empty Batch for a blank/comment line, or a Rejection."""
    p = parse_text_lines([line], source, received, max_line=max_line)
    if p.rejections:
        return p.rejections[0]
    return p.batches[0] if p.batches else Batch.empty(source)
