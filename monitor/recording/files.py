"""Append-only files that keep whole lines only (a failed write is cut back), and JSON Lines writers."""

from __future__ import annotations

import base64
import json
import os
from pathlib import Path
from typing import Any, Mapping

from adapters.batch import Rejection

__all__ = ["LineFile", "rejection_json"]


class LineFile:
    """A file opened for appending whole lines. ``write`` either appends every byte given or, on an
    OS error (disk full, I/O error), cuts the file back to its last whole line and re-raises, so the
    file never ends inside a line. ``exclusive`` refuses to overwrite an existing file."""

    def __init__(self, path: str | os.PathLike[str], *, exclusive: bool = True) -> None:
        self.path = Path(path)
        flags = os.O_WRONLY | os.O_CREAT | os.O_APPEND | (os.O_EXCL if exclusive else 0)
        self._fd: int | None = os.open(self.path, flags, 0o644)
        self.size = os.fstat(self._fd).st_size

    @property
    def closed(self) -> bool:
        return self._fd is None

    def write(self, data: bytes) -> None:
        if self._fd is None:
            raise OSError(f"{self.path}: closed")
        view = memoryview(data)
        done = 0
        try:
            while done < len(view):
                n = os.write(self._fd, view[done:])
                if n <= 0:
                    raise OSError(f"{self.path}: write returned {n}")
                done += n
        except OSError:
            if done:
                try:
                    os.ftruncate(self._fd, self.size)
                except OSError:
                    pass
            raise
        self.size += done

    def fsync(self) -> None:
        if self._fd is not None:
            os.fsync(self._fd)

    def close(self) -> None:
        if self._fd is not None:
            fd, self._fd = self._fd, None
            os.close(fd)


def rejection_json(rej: Rejection) -> dict[str, Any]:
    """A rejected frame as one JSON object; ``raw`` as text when it is UTF-8, else ``raw_base64``."""
    out: dict[str, Any] = {"type": "rejection", "received": rej.received, "source": rej.source,
                           "reason": rej.reason, "detail": rej.detail}
    try:
        out["raw"] = rej.raw.decode("utf-8")
    except UnicodeDecodeError:
        out["raw_base64"] = base64.b64encode(rej.raw).decode("ascii")
    return out


def json_line(obj: Mapping[str, Any]) -> bytes:
    return (json.dumps(obj, allow_nan=True, separators=(",", ":"), default=str) + "\n").encode("utf-8")
