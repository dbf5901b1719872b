"""The owner's alarm authority: operator requests from consoles applied through Session.apply, once each, journaled with the console's identity."""

from __future__ import annotations

import dataclasses

import collections
import json
import threading
import time
from pathlib import Path
from typing import TYPE_CHECKING, Any, Mapping

from monitor.alarms.events import AlarmEvent
from monitor.operator import UnknownAlarm
from monitor.relay.curve import server_socket_keys
from monitor.relay.requests import command_from
from monitor.relay.state import event_json
from monitor.relay.wire import VERSION, dumps

if TYPE_CHECKING:
    from monitor.relay.publisher import RelayPublisher
    from monitor.session import Session

__all__ = ["OperatorAuthority"]

_REMEMBER = 10_000      # request ids whose answers are kept (a repeat gets the same answer)


class OperatorAuthority:
    """A ROUTER socket at the relay's request address (``publisher.requests``).

    ``operators`` maps each authorised key (a shared token) to the identity the journal records;
    a request with another key is refused. A request names the run it was made for: another run's
    request is refused (an owner that restarted never applies an action meant for the run before).
    A request id already answered gets the same answer again and is not applied twice. Each request
    is journaled (``journal``, JSON lines, and ``records``) and announced on the relay, so every console
    sees who did what."""

    def __init__(self, session: Session, publisher: RelayPublisher, operators: Mapping[str, str], *,
                 journal: str | Path | None = None, context: Any = None) -> None:
        import zmq
        if publisher.requests is None:
            raise ValueError("the relay was made without a request address")
        self._zmq = zmq
        self._session = session
        self._publisher = publisher
        self._operators = dict(operators)
        ctx = context or publisher.context
        self._sock = ctx.socket(zmq.ROUTER)
        if publisher.curve is not None:
            server_socket_keys(self._sock, publisher.curve[0])
        self._sock.setsockopt(zmq.LINGER, 0)
        self._sock.setsockopt(zmq.MAXMSGSIZE, 65536)       # a hostile console cannot make us read megabytes
        try:
            self._sock.bind(publisher.requests)
        except zmq.ZMQError as exc:
            self._sock.close(0)
            from monitor.relay.publisher import RelayBindError
            raise RelayBindError(f"cannot bind the operator request address {publisher.requests}: {exc}") from None
        self.endpoint: str = self._sock.getsockopt_string(zmq.LAST_ENDPOINT)
        publisher.identity["requests"] = self.endpoint
        self._journal = Path(journal) if journal is not None else None
        self._answers: collections.OrderedDict[str, dict[str, Any]] = collections.OrderedDict()
        self.records: list[dict[str, Any]] = []
        self.applied = 0
        self.refused = 0
        self._closed = threading.Event()
        self._thread = threading.Thread(target=self._loop, name="regime-authority", daemon=True)
        self._thread.start()

    def _loop(self) -> None:
        zmq = self._zmq
        while not self._closed.is_set():
            try:
                if not self._sock.poll(50, zmq.POLLIN):
                    continue
                parts = self._sock.recv_multipart()
            except zmq.ZMQError:
                return
            if len(parts) < 2:
                continue
            answer = self.answer(parts[-1])
            try:
                self._sock.send_multipart([parts[0], dumps(answer)], zmq.NOBLOCK)
            except zmq.ZMQError:
                pass        # the console went away; a repeat of its request gets the same answer

    def answer(self, body: bytes) -> dict[str, Any]:
        """The answer to one request (applying it when it may be applied)."""
        try:
            req = json.loads(body)
            if not isinstance(req, dict):
                raise ValueError("not an object")
        except ValueError:
            return self._refuse({}, None, "the request is not a JSON object")
        rid = req.get("id")
        if not isinstance(rid, str) or not rid:
            return self._refuse(req, None, "the request has no id")
        by = self._operators.get(str(req.get("token")))
        if by is None:
            reason = ("this run takes no operator actions from consoles" if not self._operators else
                      "not authorised: the console's key is not one of this run's operators")
            return self._refuse(req, None, reason)
        if req.get("run") != self._publisher.run:
            return self._refuse(req, by, f"the run changed: the request was made for run {req.get('run')}, this is "
                                         f"run {self._publisher.run}; look at the alarm list again and repeat")
        if rid in self._answers:
            return dict(self._answers[rid], repeat=True)
        try:
            command = command_from(req)
        except ValueError as exc:
            return self._remember(rid, self._refuse(req, by, str(exc)))
        console = req.get("console")
        command = dataclasses.replace(command, by=f"{by} via {console}" if console else by)   # journaled with the event
        try:
            result = self._session.apply(command)
        except UnknownAlarm as exc:
            return self._remember(rid, self._refuse(req, by, str(exc)))
        events = result if isinstance(result, list) else []
        refusals = [e for e in events if e.action is not None and e.action.endswith("_refused")]
        if refusals:
            return self._remember(rid, self._refuse(req, by, refusals[0].message or refusals[0].action or "", events))
        if not events:
            return self._remember(rid, self._refuse(req, by, f"nothing to {req.get('command')}: "
                                                             f"{req.get('alarm') or 'no alarm'} needs no such action now"))
        self.applied += 1
        return self._remember(rid, self._record(req, by, "applied", "", events))

    def _refuse(self, req: Mapping[str, Any], by: str | None, reason: str,
                events: list[AlarmEvent] | None = None) -> dict[str, Any]:
        self.refused += 1
        return self._record(req, by, "refused", reason, events or [])

    def _remember(self, rid: str, answer: dict[str, Any]) -> dict[str, Any]:
        self._answers[rid] = answer
        while len(self._answers) > _REMEMBER:
            self._answers.popitem(last=False)
        return answer

    def _record(self, req: Mapping[str, Any], by: str | None, result: str, reason: str,
                events: list[AlarmEvent]) -> dict[str, Any]:
        record = {"type": "operator", "v": VERSION, "wall": time.time(), "id": req.get("id"),
                  "run": self._publisher.run, "console": str(req.get("console", ""))[:100], "by": by,
                  "command": req.get("command"), "alarm": req.get("alarm"), "seconds": req.get("seconds"),
                  "result": result, "reason": reason, "events": [event_json(e) for e in events]}
        self.records.append(record)
        if self._journal is not None:
            with open(self._journal, "a", encoding="utf-8") as fh:
                fh.write(dumps(record).decode("utf-8") + "\n")
        self._publisher.announce(record)
        return record

    def close(self) -> None:
        if not self._closed.is_set():
            self._closed.set()
            self._thread.join(timeout=5.0)
            self._sock.close(0)
