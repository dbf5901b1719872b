"""Parsed groups of readings: the Parsed result, the column segments the parsers build, and merging batches."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import numpy as np

from adapters.batch import Batch, Rejection

__all__ = ["Parsed", "Segment", "segments_to_batches", "merge_batches"]


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


@dataclass(frozen=True)
class Segment:
    keys: tuple[str, ...]          # channel keys (t and seq excluded)
    values: np.ndarray             # (m, len(keys)) float64
    t: np.ndarray | None           # data time, or None: receive time
    seq: np.ndarray | None


def segments_to_batches(segs: list[Segment], source: str, received: float) -> list[Batch]:
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
        t = np.concatenate([s.t for s in run]) if from_source else np.full(n, received)
        seq = np.concatenate([s.seq for s in run]) if run[0].seq is not None else None
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
            seq = np.concatenate([b.seq for b in run]) if run[0].seq is not None else None
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
