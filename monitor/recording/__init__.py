"""Recording of sessions: per-shot CSV files with metadata, the alarm journal and the rejects beside them."""

from monitor.recording_options import RecordingOptions, parse_recording
from monitor.recording.recorder import Recorder, RecorderStatus

__all__ = ["Recorder", "RecorderStatus", "RecordingOptions", "parse_recording"]
