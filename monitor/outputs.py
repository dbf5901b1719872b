"""The optional outputs of a run (recorder, alarm publisher, command hooks), built once for watch, replay and demo."""

from __future__ import annotations

import importlib.util
from dataclasses import dataclass, field
from typing import Any

from monitor.alarms.events import AlarmEvent
from monitor.errors import UsageError

__all__ = ["Outputs", "build_outputs"]


@dataclass
class Outputs:
    """The sinks of a run and the late link from the recorder's own alarm to the session."""

    sinks: list[Any] = field(default_factory=list)
    recorder: Any = None
    _session: Any = None

    def relay(self, event: AlarmEvent) -> None:
        """The recorder's write alarm reaches the screen, the printers and the publisher."""
        if self._session is not None:
            self._session.emit(event, origin=self.recorder)

    def bind(self, session: Any) -> None:
        """Attach to the session that now carries these sinks."""
        self._session = session


def _available(name: str) -> bool:
    try:
        return importlib.util.find_spec(name) is not None
    except ModuleNotFoundError:
        return False


def build_outputs(config: Any, *, source_name: str, record: str | None = None,
                  alarm_pub: str | None = None, config_directory: bool = True) -> Outputs:
    """Recorder (``record`` or ``[recording] directory``), alarm publisher, and the command hooks
    of ``[alarms]``; raise UsageError for an output that cannot be made. A replay passes
    ``config_directory=False`` so that an old shot's ``[recording]`` table does not record it again."""
    out = Outputs()
    directory = record
    if directory is None and config_directory:
        directory = getattr(getattr(config, "recording", None), "directory", None)
    if directory:
        if not _available("monitor.recording"):
            raise UsageError("--record: the recorder is not available in this build")
        from monitor.recording import Recorder

        try:
            out.recorder = Recorder(directory, config, source_name=source_name, emit=out.relay)
        except OSError as exc:
            raise UsageError(f"--record {directory}: {exc.strerror or exc}") from None
        out.sinks.append(out.recorder)
    if alarm_pub:
        from monitor.alarms.publisher import AlarmPublisher

        out.sinks.append(AlarmPublisher(alarm_pub))
    from monitor.alarms.hooks import hook_sink

    hooks = hook_sink(getattr(config, "alarms", None))
    if hooks is not None:
        out.sinks.append(hooks)
    return out
