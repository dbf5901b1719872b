"""The optional outputs of a run (alarm journal, recorder, alarm publisher, command hooks), built once for watch, replay and demo."""

from __future__ import annotations

import importlib.util
import sys
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any

from monitor.errors import UsageError

if TYPE_CHECKING:
    from monitor.config import Config
    from monitor.recording.recorder import Recorder, RecorderStatus

__all__ = ["Outputs", "build_outputs", "publisher_endpoint"]


@dataclass
class Outputs:
    """The sinks of a run; ``recorder`` is one of them (or None), handed to the Session, which raises
    its health as the engine's ``recorder:write`` alarm."""

    sinks: list[Any] = field(default_factory=list)
    recorder: Recorder | None = None

    def close(self) -> None:
        """Close what was made so far (an output refused later in build_outputs)."""
        for sink in self.sinks:
            close = getattr(sink, "close", None)
            if callable(close):
                close()

    def recorder_status(self) -> RecorderStatus | None:
        """The recorder's RecorderStatus, or None when the run does not record."""
        return self.recorder.status() if self.recorder is not None else None


def _available(name: str) -> bool:
    try:
        return importlib.util.find_spec(name) is not None
    except ModuleNotFoundError:
        return False


def publisher_endpoint(alarm_pub: str, config: Config, allow_remote: bool = False) -> tuple[str, bool]:
    """The endpoint the alarm publisher binds, and whether it may bind beyond loopback: asked for by
    ``allow_remote`` (``--allow-remote``) or by ``[sources] allow_remote = true`` in the config, the same
    opt-in that lets a ZeroMQ source connect off this machine. Raise UsageError for a non-loopback
    address without it."""
    from monitor.alarms.publisher import normalise_endpoint

    remote = bool(allow_remote or config.allow_remote)
    return normalise_endpoint(alarm_pub, allow_remote=remote), remote


def _recording_directory(directory: str, flag: str) -> None:
    """Refuse, before any reading is taken, a directory that cannot be created or written."""
    from monitor.recording.files import check_writable

    try:
        check_writable(directory)
    except OSError as exc:
        reason = exc.strerror or str(exc)
        raise UsageError(f"{flag} {directory}: cannot record there: {reason}") from None


def _journal_sink(path: str, flag: str) -> Any:
    """The alarm journal at ``path``, appended to (an existing journal keeps its lines); refused with
    UsageError naming the file and the reason when it cannot be opened for writing."""
    from monitor.alarms.journal import JournalSink

    def warn(text: str) -> None:
        print(f"regime: {text}", file=sys.stderr, flush=True)

    target = Path(path)
    if target.is_dir():
        raise UsageError(f"{flag} {path}: cannot write the journal there: it is a directory, give a file name")
    existing = next((p for p in target.parents if p.exists()), None)
    if existing is not None and not existing.is_dir():
        raise UsageError(f"{flag} {path}: cannot write the journal there: {existing} is not a directory")
    try:
        return JournalSink(target, append=True, warn=warn)
    except OSError as exc:
        reason = exc.strerror or str(exc)
        raise UsageError(f"{flag} {path}: cannot write the journal there: {reason}") from None


def build_outputs(config: Config, *, source_name: str, record: str | None = None,
                  alarm_pub: str | None = None, config_directory: bool = True,
                  allow_remote: bool = False, journal: str | None = None) -> Outputs:
    """Alarm journal (``journal`` or ``[alarms] journal``), recorder (``record`` or ``[recording]
    directory``), alarm publisher, and the command hooks of ``[alarms]``; raise UsageError for an
    output that cannot be made (a journal file or a recording directory that cannot be created or
    written, a publisher address that is refused; PublisherBindError, exit 3, for one that cannot be
    bound). A replay passes ``config_directory=False`` so that an old shot's ``[recording]`` table
    does not record it again and its ``[alarms] journal`` is not appended to."""
    out = Outputs()
    journal_path, journal_flag = journal, "--journal"
    if journal_path is None and config_directory:
        journal_path = config.alarms.journal if config.alarms is not None else None
        journal_flag = "[alarms] journal"
    if journal_path:
        # first: nothing else is opened or bound when the journal is refused
        out.sinks.append(_journal_sink(str(journal_path), journal_flag))

    directory, flag = record, "--record"
    if directory is None and config_directory:
        directory = config.recording.directory if config.recording is not None else None
        flag = "[recording] directory"
    if directory:
        if not _available("monitor.recording"):
            out.close()
            raise UsageError(f"{flag}: the recorder is not available in this build")
        from monitor.recording import Recorder

        try:
            _recording_directory(str(directory), flag)
        except UsageError:
            out.close()
            raise
        try:
            out.recorder = Recorder(directory, config, source_name=source_name)
        except OSError as exc:
            out.close()
            raise UsageError(f"{flag} {directory}: {exc.strerror or exc}") from None
        out.sinks.append(out.recorder)
    if alarm_pub:
        from monitor.alarms.publisher import AlarmPublisher

        try:
            endpoint, remote = publisher_endpoint(alarm_pub, config, allow_remote)
            out.sinks.append(AlarmPublisher(endpoint, allow_remote=remote))
        except UsageError:
            out.close()
            raise
    from monitor.alarms.hooks import hook_sink

    hooks = hook_sink(config.alarms)
    if hooks is not None:
        out.sinks.append(hooks)
    return out
