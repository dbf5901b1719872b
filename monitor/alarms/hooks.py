"""Command hooks per priority: an argument list run without a shell, in a worker thread, with a timeout."""

from __future__ import annotations

import atexit
import logging
import os
import queue
import signal
import subprocess
import threading
import weakref
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


_RUNNERS: "weakref.WeakSet[HookRunner]" = weakref.WeakSet()


def _end_all_hooks() -> None:
    """At interpreter exit: no hook outlives the run (none is left for init to adopt)."""
    for runner in list(_RUNNERS):
        runner.stop()


atexit.register(_end_all_hooks)


def _kill(proc: subprocess.Popen[str]) -> None:
    """End a hook and whatever it started (it runs in its own process group)."""
    try:
        os.killpg(proc.pid, signal.SIGKILL)
    except (ProcessLookupError, PermissionError):
        try:
            proc.kill()
        except OSError:
            pass


class HookRunner(AlarmOnlySink):
    """A Sink that queues matching events to one worker thread; ``on_alarm`` never waits for a command.

    The event's JSON line is given on the command's standard input. A hook
    that times out is killed with its process group; failures are logged and
    kept in ``results``. When more than ``max_queue`` hooks wait, new ones are
    dropped (logged). ``close`` (and, failing that, interpreter exit) ends a
    hook still running and skips the ones still queued: no hook outlives the run.
    """

    def __init__(self, hooks: Mapping[Priority, HookSpec], *, max_queue: int = 100, keep: int = 200) -> None:
        self.hooks = dict(hooks)
        self.results: list[HookResult] = []
        self.dropped = 0
        self._keep = keep
        self._queue: queue.Queue[tuple[HookSpec, AlarmEvent] | None] = queue.Queue(maxsize=max_queue)
        self._done = threading.Condition()
        self._thread: threading.Thread | None = None
        self._lock = threading.Lock()
        self._proc: subprocess.Popen[str] | None = None     # the hook running now
        self._stopped = False
        _RUNNERS.add(self)

    def on_alarm(self, event: AlarmEvent) -> None:
        spec = self.hooks.get(event.priority)
        if spec is None or event.state.value not in spec.states:
            return
        if event.state == event.previous and event.message != "re-alarm":
            return
        if self._stopped:
            self.dropped += 1
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
            with self._lock:
                if self._stopped:
                    self.dropped += 1
                    self._record(HookResult(event.alarm, tuple(args), None, "not run: the run ended"))
                    continue
                try:
                    proc = subprocess.Popen(args, stdin=subprocess.PIPE, stdout=subprocess.PIPE,
                                            stderr=subprocess.PIPE, text=True, shell=False, start_new_session=True)
                except OSError as exc:
                    log.warning("alarm hook %s for %s could not start: %s", args[0], event.alarm, exc)
                    self._record(HookResult(event.alarm, tuple(args), None, str(exc)))
                    continue
                self._proc = proc
            try:
                _, err = proc.communicate(event_line(event) + "\n", timeout=spec.timeout)
            except subprocess.TimeoutExpired:
                _kill(proc)
                proc.communicate()
                log.warning("alarm hook %s for %s killed after %g s", args[0], event.alarm, spec.timeout)
                self._record(HookResult(event.alarm, tuple(args), None, f"timeout after {spec.timeout:g} s"))
                continue
            except (OSError, ValueError) as exc:       # ended under us by stop(): pipes closed
                _kill(proc)
                proc.wait()
                self._record(HookResult(event.alarm, tuple(args), None, f"ended with the run ({exc})"))
                continue
            finally:
                with self._lock:
                    self._proc = None
            if self._stopped and proc.returncode < 0:
                self._record(HookResult(event.alarm, tuple(args), None, "ended with the run"))
                continue
            if proc.returncode != 0:
                log.warning("alarm hook %s for %s exited %d: %s", args[0], event.alarm, proc.returncode,
                            err.strip()[-200:])
            self._record(HookResult(event.alarm, tuple(args), proc.returncode, err.strip()[-200:]))

    def wait(self, count: int, timeout: float) -> bool:
        """Block until at least ``count`` hooks have finished (for tests and orderly shutdown)."""
        with self._done:
            return self._done.wait_for(lambda: len(self.results) >= count, timeout)

    def stop(self) -> None:
        """End the hook running now (with its process group) and run no more."""
        with self._lock:
            self._stopped = True
            proc = self._proc
        if proc is not None and proc.poll() is None:
            log.warning("alarm hook %s ended with the run", proc.args[0] if isinstance(proc.args, list) else proc.args)
            _kill(proc)

    def close(self, timeout: float = 1.0) -> None:
        """Let the running hook finish for up to ``timeout`` s, then end it; hooks still queued are not run."""
        if self._thread is not None:
            try:
                self._queue.put_nowait(None)
            except queue.Full:
                pass
            self._thread.join(timeout)
            self.stop()
            if self._thread.is_alive():
                try:
                    self._queue.put_nowait(None)
                except queue.Full:
                    pass
                self._thread.join(2.0)
        self._stopped = True


def hook_sink(options: object | None) -> HookRunner | None:
    """A HookRunner for the hooks of an AlarmOptions (``config.alarms``), or None when none are configured."""
    hooks = getattr(options, "hooks", None)
    return HookRunner(hooks) if hooks else None
