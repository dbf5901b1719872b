"""Helpers for the pipeline tests: batches built from plain arrays, a small in-test Source, a collecting sink."""

from __future__ import annotations

import threading
from typing import Iterable

import numpy as np

from adapters.base import FatalSourceError, LinkState, Polled, SourceStatus, TransientSourceError
from adapters.batch import Batch, Rejection


def make_batch(t, source: str = "probe", seq=None, sigma=None, **columns) -> Batch:
    t = np.asarray(t, dtype=np.float64)
    cols = {k: np.asarray(v, dtype=np.float64) * np.ones(len(t)) for k, v in columns.items()}
    return Batch(source=source, t=t, columns=cols,
                 sigma={k: np.asarray(v, dtype=np.float64) for k, v in (sigma or {}).items()},
                 seq=None if seq is None else np.asarray(seq, dtype=np.int64))


def split(batch: Batch, cuts: Iterable[int]) -> list[Batch]:
    """The same readings cut into several batches at the given row indices."""
    edges = [0, *sorted(cuts), len(batch)]
    out = []
    for a, b in zip(edges[:-1], edges[1:]):
        out.append(Batch(source=batch.source, t=batch.t[a:b], columns={k: v[a:b] for k, v in batch.columns.items()},
                         sigma={k: v[a:b] for k, v in batch.sigma.items()},
                         seq=None if batch.seq is None else batch.seq[a:b]))
    return out


class ListSource:
    """A real Source of our own: hands out prepared batches, one per poll, then ends.

    ``script`` items are Batch, Rejection, an exception instance (raised by that
    poll) or a LinkState (reported as the status of that poll).
    """

    def __init__(self, script: list, name: str = "probe", end: bool = True) -> None:
        self.name = name
        self.script = list(script)
        self.end = end
        self.state = LinkState.CONNECTING
        self.message = ""
        self.opened = threading.Event()
        self.closed = threading.Event()
        self.polls = 0

    def open(self) -> None:
        self.state = LinkState.CONNECTED
        self.opened.set()

    def poll(self, timeout: float) -> Polled:
        self.polls += 1
        if not self.script:
            if self.end:
                self.state = LinkState.ENDED
            else:
                self.closed.wait(min(timeout, 0.01))
            return Polled(status=self.status())
        item = self.script.pop(0)
        if isinstance(item, (TransientSourceError, FatalSourceError)):
            raise item
        if isinstance(item, LinkState):
            self.state = item
            self.message = f"now {item.value}"
            return Polled(status=self.status())
        if isinstance(item, Rejection):
            return Polled(rejections=[item], status=self.status())
        self.state = LinkState.CONNECTED
        return Polled(batches=[item], status=self.status())

    def status(self) -> SourceStatus:
        return SourceStatus(self.name, self.state, self.message)

    def close(self) -> None:
        self.closed.set()


class CollectSink:
    """A sink that keeps what it was handed."""

    def __init__(self) -> None:
        self.frames = []
        self.rejections: list[Rejection] = []
        self.alarms = []
        self.statuses: list[SourceStatus] = []
        self.closed = False

    def on_frame(self, frame) -> None:
        self.frames.append(frame)

    def on_rejections(self, rejections) -> None:
        self.rejections.extend(rejections)

    def on_alarm(self, event) -> None:
        self.alarms.append(event)

    def on_status(self, status) -> None:
        self.statuses.append(status)

    def close(self) -> None:
        self.closed = True
