"""The columnar batch that every source yields and the rejection record it keeps for refused input."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Mapping

import numpy as np

__all__ = ["Batch", "Rejection"]

_EMPTY_F8 = np.empty(0, dtype=np.float64)


@dataclass(frozen=True, eq=False)
class Batch:
    """A run of readings from one source, stored column by column.

    ``t`` is the data time in seconds (float64); where a source sends no time
    the adapter stamps the receive time (``time.time()``) and sets
    ``t_from_source`` to False. ``columns`` maps a key to a float64 array of
    the same length as ``t``: adapters use the instrument's own keys, the
    pipeline's channel map turns them into canonical quantities (``ne``,
    ``Te``, ``Ti``, ``B``, ``p0``) in canonical units; NaN marks a key that a
    reading did not carry. ``sigma`` holds per-sample standard uncertainties
    for some of the keys. ``seq`` is an int64 array of sequence numbers, or
    None when the source numbers nothing. ``auxiliary`` names columns a
    source carries for information, not as readings (a raw signal and a
    diagnostic's intermediate results, e.g. an interferometer's I/Q and
    fringe flags): the channel map neither maps them nor counts them as
    unknown keys.
    """

    source: str
    t: np.ndarray
    columns: Mapping[str, np.ndarray]
    sigma: Mapping[str, np.ndarray] = field(default_factory=dict)
    seq: np.ndarray | None = None
    t_from_source: bool = True
    auxiliary: frozenset[str] = frozenset()

    def __post_init__(self) -> None:
        n = len(self.t)
        for key, col in self.columns.items():
            if len(col) != n:
                raise ValueError(f"column {key!r} has {len(col)} samples, t has {n}")
        for key, col in self.sigma.items():
            if len(col) != n:
                raise ValueError(f"sigma {key!r} has {len(col)} samples, t has {n}")
        if self.seq is not None and len(self.seq) != n:
            raise ValueError(f"seq has {len(self.seq)} samples, t has {n}")

    def __len__(self) -> int:
        return len(self.t)

    @property
    def seq_range(self) -> tuple[int, int] | None:
        """First and last sequence number, or None."""
        if self.seq is None or len(self.seq) == 0:
            return None
        return int(self.seq[0]), int(self.seq[-1])

    @classmethod
    def empty(cls, source: str) -> "Batch":
        return cls(source=source, t=_EMPTY_F8, columns={})


@dataclass(frozen=True)
class Rejection:
    """One refused frame or line, kept whole with the reason it was refused.

    ``reason`` is a short stable token (``malformed``, ``bad_json``,
    ``oversized``, ``bad_binary_header``, ``not_finite``, ...) used as the key
    of the rejected-by-reason counters. ``raw`` is the input exactly as it
    arrived (bytes). ``received`` is the wall-clock receive time.

    ``count`` is how many readings the refused input stands for (a text line
    or a JSON frame: 1; a binary batch: the readings its payload held), and
    ``seq_first``/``seq_last`` the sequence numbers it covered (inclusive),
    when the adapter could read them: the ledger counts the rejection as
    ``count`` readings and does not count the seq numbers it covered again as
    lost. The adapter that refused the input fills them; nothing parses
    ``raw`` or ``detail`` back.
    """

    source: str
    reason: str
    raw: bytes
    received: float
    detail: str = ""
    count: int = 1
    seq_first: int | None = None
    seq_last: int | None = None
