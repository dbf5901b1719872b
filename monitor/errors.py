"""Error roots of the monitor layer: bad usage or configuration (exit 2), source failure (exit 3); exit 4 = recording incomplete."""

from __future__ import annotations

from pathlib import Path

__all__ = ["MonitorError", "UsageError", "ConfigError", "EXIT_OK", "EXIT_USAGE", "EXIT_SOURCE", "EXIT_RECORDING"]

EXIT_OK = 0
EXIT_USAGE = 2
EXIT_SOURCE = 3
EXIT_RECORDING = 4      # the run ended, the source did not fail, but readings of a shot did not reach the disk


class MonitorError(Exception):
    """Root of the monitor layer's errors."""


class UsageError(MonitorError):
    """Bad command-line input; the CLI prints the message and exits 2."""


class ConfigError(UsageError):
    """A configuration file is wrong: names the file, the key and what is wrong."""

    def __init__(self, path: str | Path | None, key: str, message: str) -> None:
        self.path = str(path) if path is not None else "<config>"
        self.key = key
        self.message = message
        super().__init__(f"{self.path}: {key}: {message}")
