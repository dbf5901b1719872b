"""Helpers for the adapter tests: free ports, deadline polling and draining a source."""

from __future__ import annotations

import socket
import time
from dataclasses import dataclass, field
from typing import Callable

import numpy as np

from adapters.base import LinkState, Polled
from adapters.batch import Batch, Rejection


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


def wait_until(cond: Callable[[], bool], timeout: float = 5.0, step: float = 0.01) -> bool:
    """Poll ``cond`` until true or the deadline; returns the last value."""
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        if cond():
            return True
        time.sleep(step)
    return bool(cond())


@dataclass
class Drained:
    batches: list[Batch] = field(default_factory=list)
    rejections: list[Rejection] = field(default_factory=list)
    states: list[LinkState] = field(default_factory=list)

    def add(self, p: Polled) -> None:
        self.batches.extend(p.batches)
        self.rejections.extend(p.rejections)
        if p.status is not None and (not self.states or self.states[-1] is not p.status.state):
            self.states.append(p.status.state)

    @property
    def readings(self) -> int:
        return sum(len(b) for b in self.batches)

    def seqs(self) -> np.ndarray:
        parts = [b.seq for b in self.batches if b.seq is not None]
        return np.concatenate(parts) if parts else np.empty(0, dtype=np.int64)

    def column(self, key: str) -> np.ndarray:
        return np.concatenate([b.columns[key] if key in b.columns else np.full(len(b), np.nan) for b in self.batches]) \
            if self.batches else np.empty(0)

    def reasons(self) -> list[str]:
        return [r.reason for r in self.rejections]


def drain(source, until: Callable[[Drained], bool], timeout: float = 10.0, into: Drained | None = None) -> Drained:
    """Poll ``source`` until ``until(drained)`` holds or the deadline passes."""
    d = into or Drained()
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        d.add(source.poll(0.05))
        if until(d):
            break
    return d
