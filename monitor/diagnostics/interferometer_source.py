"""InterferometerSource: wraps any Source and turns its phase or I/Q columns into density readings on every batch."""

from __future__ import annotations

import time
from typing import Callable

from adapters.base import Polled, Source, SourceStatus
from adapters.batch import Batch, Rejection
from monitor.diagnostics.interferometer_config import InterferometerConfig
from monitor.diagnostics.interferometer_stage import InterferometerStage, StageCounts

__all__ = ["InterferometerSource", "REPLAY_CONTROLS", "simulator_config"]

# optional controls of the inner source handed through when it has them (replay: monitor.pipeline.controls)
REPLAY_CONTROLS = frozenset({
    "pause", "resume", "step", "set_speed", "position", "catching_up", "first_time", "end_time", "set_window",
    "damage", "damage_summary", "end_message", "skipped", "skipped_lines", "released",
})


class InterferometerSource:
    """A Source whose batches are the inner source's, passed through an InterferometerStage.

    Serial, ZeroMQ, CSV and simulated sources all work: the stage only looks
    at the columns (``phase`` or ``I_q``/``Q_q``, and the discharge column if
    configured). Rejections and the link state are the inner source's; the
    status message gains the interferometer's state (fringe lost and why, the
    fringe-jump count). A fault in the stage itself refuses nothing: the batch
    passes on unanalysed, a Rejection ``internal_error`` records it, and the
    stage starts over. Replay controls of the inner source are handed through;
    a seek that is not ``"forward"`` starts the stage over too.
    """

    def __init__(self, inner: Source, config: InterferometerConfig, *, on_above: float = 1.0e15) -> None:
        self.inner = inner
        self.name = inner.name
        self.stage = InterferometerStage(config, on_above=on_above)
        self.internal_errors = 0

    def open(self) -> None:
        self.inner.open()

    def close(self) -> None:
        self.inner.close()

    @property
    def counts(self) -> StageCounts:
        return self.stage.counts

    def poll(self, timeout: float) -> Polled:
        polled = self.inner.poll(timeout)
        batches: list[Batch] = []
        rejections: list[Rejection] = list(polled.rejections)
        for batch in polled.batches:
            try:
                batches.append(self.stage.process(batch))
            except Exception as exc:  # noqa: BLE001 - our own fault: counted and shown, the data go on
                self.internal_errors += 1
                self.stage.reset()
                batches.append(batch)
                rejections.append(Rejection(source=self.name, reason="internal_error",
                                            raw=f"interferometer stage: {len(batch)} readings".encode(),
                                            received=time.time(), detail=f"interferometer: {exc!r}"))
        status = None if polled.status is None else self._annotate(polled.status)
        return Polled(batches=batches, rejections=rejections, status=status)

    def status(self) -> SourceStatus:
        return self._annotate(self.inner.status())

    def _annotate(self, status: SourceStatus) -> SourceStatus:
        c = self.stage.counts
        if self.internal_errors:
            state = f"interferometer: {self.internal_errors} batch(es) not analysed (internal error, see rejections)"
            return SourceStatus(status.name, status.state, f"{status.message}; {state}" if status.message else state,
                                status.retries)
        if c.samples == 0:
            return status
        jumps = f"{c.fringe_jumps} fringe jump{'' if c.fringe_jumps == 1 else 's'}"
        if c.reason_now == "ok":
            state = f"interferometer ok, {jumps}"
        elif c.reason_now == "no_zero":
            state = f"interferometer: no zero yet (waiting for a discharge-off period), {jumps}"
        else:
            at = "" if c.last_event_t is None else f" at t={c.last_event_t:.6f}"
            state = f"interferometer: FRINGE LOST{at} ({c.reason_now.replace('_', ' ')}), {jumps}"
        message = f"{status.message}; {state}" if status.message else state
        return SourceStatus(status.name, status.state, message, status.retries)

    def _seek(self, t: float) -> str:
        """The inner source's seek; anything but a forward seek starts the stage over."""
        inner_seek: Callable[[float], object] = getattr(self.inner, "seek")
        answer = inner_seek(t)
        if answer != "forward":
            self.stage.reset()
        return str(answer)

    def __getattr__(self, name: str) -> object:
        # called only for names not found on the wrapper: the inner source's optional controls, present
        # on the wrapper exactly when the inner source has them (the session probes with getattr)
        inner = self.__dict__.get("inner")
        if inner is None or not hasattr(inner, name):
            raise AttributeError(name)
        if name == "seek":
            return self._seek
        if name in REPLAY_CONTROLS:
            return getattr(inner, name)
        raise AttributeError(name)


def simulator_config() -> InterferometerConfig:
    """The set-up of ``sim:interferometer`` (adapters.sim_interferometer), for a run with no ``[interferometer]`` table."""
    from adapters.sim_interferometer import SCENARIO

    return InterferometerConfig(frequency=SCENARIO.frequency, path_length=SCENARIO.path_length,
                                passes=SCENARIO.passes, discharge_column="discharge", amplitude_min=0.5,
                                amplitude_relative=True)
