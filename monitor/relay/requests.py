"""Operator requests from a console to the owner: the request and reply format and the console's client (DEALER)."""

from __future__ import annotations

import json
import threading
import uuid
from dataclasses import dataclass, field
from typing import Any, Mapping

from monitor.operator import Acknowledge, AlarmCommand, Reset, Shelve, Unshelve
from monitor.relay.curve import ConsoleCurve, client_socket_keys
from monitor.relay.wire import VERSION, dumps

__all__ = ["Reply", "OperatorClient", "command_from", "COMMANDS"]

COMMANDS = ("acknowledge", "shelve", "unshelve", "reset")


@dataclass(frozen=True)
class Reply:
    """The owner's answer: ``applied`` or not, the reason when refused, the events it caused (JSON),
    ``repeat`` when the owner had already answered this request id (it was not applied again)."""

    applied: bool
    reason: str = ""
    events: tuple[Mapping[str, Any], ...] = ()
    request: str = ""
    by: str | None = None
    repeat: bool = False
    extra: Mapping[str, Any] = field(default_factory=dict)

    @classmethod
    def from_json(cls, d: Mapping[str, Any]) -> "Reply":
        return cls(applied=d.get("result") == "applied", reason=str(d.get("reason", "")),
                   events=tuple(d.get("events") or ()), request=str(d.get("id", "")), by=d.get("by"),
                   repeat=bool(d.get("repeat", False)))


def command_from(d: Mapping[str, Any]) -> AlarmCommand:
    """The typed operator command of a request; ValueError for anything else (replay steering and
    out-of-service stay with the owner)."""
    name = d.get("command")
    alarm = d.get("alarm")
    if alarm is not None and not isinstance(alarm, str):
        raise ValueError("alarm must be a string")
    if name == "acknowledge":
        return Acknowledge(alarm)
    if alarm is None:
        raise ValueError(f"{name} needs an alarm id")
    if name == "shelve":
        seconds = d.get("seconds")
        if seconds is not None and not (isinstance(seconds, (int, float)) and seconds > 0):
            raise ValueError("seconds must be a positive number or null")
        return Shelve(alarm, None if seconds is None else float(seconds))
    if name == "unshelve":
        return Unshelve(alarm)
    if name == "reset":
        return Reset(alarm)
    raise ValueError(f"unknown command {name!r}; a console may send {', '.join(COMMANDS)}")


class OperatorClient:
    """Sends a console's operator actions to the owner's request address and waits for the answer.

    Each action has its own request id, sent again (same id) when no answer comes, so the owner
    applies it at most once; the run id the console saw goes with it, so an owner that restarted
    refuses it instead of acting on a run the operator never saw. Thread-safe (one request at a time)."""

    def __init__(self, endpoint: str, *, token: str, name: str, context: Any = None,
                 curve: ConsoleCurve | None = None) -> None:
        import zmq
        self._zmq = zmq
        ctx = context or zmq.Context.instance()
        self._sock = ctx.socket(zmq.DEALER)
        if curve is not None:
            client_socket_keys(self._sock, curve)
        self._sock.setsockopt(zmq.LINGER, 0)
        self._sock.connect(endpoint)
        self.endpoint = endpoint
        self.token = token
        self.name = name
        self._lock = threading.Lock()

    def request(self, command: str, alarm: str | None = None, seconds: float | None = None, *, run: str | None,
                timeout: float = 2.0, attempts: int = 2, request_id: str | None = None) -> Reply:
        """One action, answered; after ``attempts`` silent waits of ``timeout`` s a refusal that says the
        outcome is unknown (the alarm list shows what happened)."""
        rid = request_id or uuid.uuid4().hex
        body = dumps({"v": VERSION, "id": rid, "run": run, "console": self.name, "token": self.token,
                      "command": command, "alarm": alarm, "seconds": seconds})
        with self._lock:
            for _ in range(max(1, attempts)):
                self._sock.send(body)
                deadline = int(timeout * 1000)
                while self._sock.poll(deadline, self._zmq.POLLIN):
                    try:
                        d = json.loads(self._sock.recv())
                    except ValueError:
                        continue
                    if d.get("id") == rid:
                        return Reply.from_json(d)
                    deadline = 0 if deadline <= 0 else deadline   # an answer to an older request: keep waiting
        return Reply(False, f"no answer from the owner at {self.endpoint}; the action may not have been applied "
                            "(the alarm list shows the owner's state)", request=rid)

    def close(self) -> None:
        self._sock.close(0)
