"""Append-only files that keep whole lines only (a failed write is cut back), JSON Lines writers, the start-up write check."""

from __future__ import annotations

import base64
import errno
import json
import os
import tempfile
from pathlib import Path
from typing import Any, Mapping

from adapters.batch import Rejection

__all__ = ["LineFile", "rejection_json", "check_writable"]


def check_writable(directory: str | os.PathLike[str]) -> None:
    """Create ``directory`` if needed and prove a file can be written in it (a probe file, removed
    again); raise OSError with the reason (permission, read-only file system, a file in the way,
    disk full) otherwise. Mode bits alone would not tell (root, ACLs, read-only mounts)."""
    path = Path(directory)
    if path.exists() and not path.is_dir():
        raise NotADirectoryError(errno.ENOTDIR, "it exists and is not a directory", str(path))
    path.mkdir(parents=True, exist_ok=True)
    fd, probe = tempfile.mkstemp(prefix=".regime-write-check-", dir=path)
    try:
        os.write(fd, b"regime write check\n")
        os.fsync(fd)
    finally:
        os.close(fd)
        os.unlink(probe)


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

    def unlinked(self) -> bool:
        """True when the file was deleted (or its directory removed) while open: writes would still succeed."""
        return self._fd is not None and os.fstat(self._fd).st_nlink == 0

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
