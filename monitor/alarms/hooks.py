"""Command hooks per priority: an argument list run without a shell, in a worker thread, with a timeout."""

from __future__ import annotations

import logging
import queue
import subprocess
import threading
from dataclasses import dataclass
from typing import Mapping

from monitor.alarms.envelope import HookSpec
from monitor.alarms.events import AlarmEvent, Priority
from monitor.alarms.journal import event_line
from monitor.alarms.listener import AlarmOnlySink

__all__ = ["HookResult", "HookRunner", "expand", "hook_sink"]

log = logging.getLogger("monitor.alarms.hooks")
_FIELDS = ("alarm", "state", "previous", "priority", "quantity", "value", "limit", "time", "kind", "message")


def expand(command: tuple[str, ...], event: AlarmEvent) -> list[str]:
    """Replace ``{alarm}``, ``{state}``, ``{priority}``, ``{value}``, ... in each argument (nothing else)."""
    d = event.to_json()
    args = []
    for arg in command:
        for name in _FIELDS:
            arg = arg.replace("{" + name + "}", "" if d.get(name) is None else str(d[name]))
        args.append(arg)
    return args


@dataclass(frozen=True)
class HookResult:
    alarm: str
    command: tuple[str, ...]
    returncode: int | None        # None: it did not finish (timeout) or could not start
    error: str = ""


class HookRunner(AlarmOnlySink):
    """A Sink that queues matching events to one worker thread; ``on_alarm`` never waits for a command.

    The event's JSON line is given on the command's standard input. A hook
    that times out is killed; failures are logged and kept in ``results``.
    When more than ``max_queue`` hooks wait, new ones are dropped (logged).
    """

    def __init__(self, hooks: Mapping[Priority, HookSpec], *, max_queue: int = 100, keep: int = 200) -> None:
        self.hooks = dict(hooks)
        self.results: list[HookResult] = []
        self.dropped = 0
        self._keep = keep
        self._queue: queue.Queue[tuple[HookSpec, AlarmEvent] | None] = queue.Queue(maxsize=max_queue)
        self._done = threading.Condition()
        self._thread: threading.Thread | None = None

    def on_alarm(self, event: AlarmEvent) -> None:
        spec = self.hooks.get(event.priority)
        if spec is None or event.state.value not in spec.states:
            return
        if event.state == event.previous and event.message != "re-alarm":
            return
        if self._thread is None:
            self._thread = threading.Thread(target=self._work, name="alarm-hooks", daemon=True)
            self._thread.start()
        try:
            self._queue.put_nowait((spec, event))
        except queue.Full:
            self.dropped += 1
            log.warning("alarm hook for %s dropped: %d hooks already waiting", event.alarm, self._queue.qsize())

    def _record(self, result: HookResult) -> None:
        with self._done:
            self.results.append(result)
            del self.results[:-self._keep]
            self._done.notify_all()

    def _work(self) -> None:
        while True:
            item = self._queue.get()
            if item is None:
                return
            spec, event = item
            args = expand(spec.command, event)
            try:
                proc = subprocess.run(args, input=event_line(event) + "\n", text=True, capture_output=True,
                                      timeout=spec.timeout, shell=False)
            except subprocess.TimeoutExpired:
                log.warning("alarm hook %s for %s killed after %g s", args[0], event.alarm, spec.timeout)
                self._record(HookResult(event.alarm, tuple(args), None, f"timeout after {spec.timeout:g} s"))
                continue
            except OSError as exc:
                log.warning("alarm hook %s for %s could not start: %s", args[0], event.alarm, exc)
                self._record(HookResult(event.alarm, tuple(args), None, str(exc)))
                continue
            if proc.returncode != 0:
                log.warning("alarm hook %s for %s exited %d: %s", args[0], event.alarm, proc.returncode,
                            proc.stderr.strip()[-200:])
            self._record(HookResult(event.alarm, tuple(args), proc.returncode, proc.stderr.strip()[-200:]))

    def wait(self, count: int, timeout: float) -> bool:
        """Block until at least ``count`` hooks have finished (for tests and orderly shutdown)."""
        with self._done:
            return self._done.wait_for(lambda: len(self.results) >= count, timeout)

    def close(self, timeout: float = 1.0) -> None:
        if self._thread is not None:
            try:
                self._queue.put_nowait(None)
            except queue.Full:
                pass
            self._thread.join(timeout)


def hook_sink(options: object | None) -> HookRunner | None:
    """A HookRunner for the hooks of an AlarmOptions (``config.alarms``), or None when none are configured."""
    hooks = getattr(options, "hooks", None)
    return HookRunner(hooks) if hooks else None
