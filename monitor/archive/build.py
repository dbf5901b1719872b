"""Building the catalogue: find the recordings, keep the unchanged, summarise the rest (serially, on a process pool or on a Dask cluster) and stream rows into it."""

from __future__ import annotations

import os
import time
from dataclasses import dataclass
from pathlib import Path
from typing import Callable, Iterable, Iterator

from monitor.archive import catalogue
from monitor.archive.columns import COLUMN_NAMES
from monitor.archive.summary import Row, config_fingerprint, content_hash, summarise

__all__ = ["Found", "BuildResult", "Plan", "plan", "scan", "build", "in_progress_row", "SETTLE_S", "Progress"]

SETTLE_S = 5.0                  # a file written to within this many seconds is still being recorded
_EXPORT_HEAD = b"file,status,shot,"   # the first bytes of our own CSV export (never catalogued)

# (files done, files to do, readings summarised so far) after each file
Progress = Callable[[int, int, int], None]


@dataclass(frozen=True)
class Found:
    """A recording under the archive directory: its key (path relative to it) and fingerprint."""

    key: str
    path: str
    size: int
    mtime_ns: int
    content_hash: str
    in_progress: bool


@dataclass(frozen=True)
class BuildResult:
    version: int
    total: int          # recordings catalogued in this version
    read: int           # summarised in this run
    unchanged: int
    in_progress: int
    removed: int
    damaged: int        # damaged or unreadable among those read
    readings: int       # readings accepted in the files read
    seconds: float


def scan(directory: str | os.PathLike[str], *, settle: float = SETTLE_S, now: float | None = None,
         skip: Iterable[str] = ()) -> list[Found]:
    """Every ``*.csv`` under ``directory`` (recursively, hidden names left out, our own CSV exports and
    ``skip`` too), sorted by key; ``in_progress`` for a file written to within ``settle`` seconds."""
    root = Path(directory)
    now = time.time() if now is None else now
    skipped = {os.path.realpath(s) for s in skip}
    out: list[Found] = []
    for dirpath, dirnames, filenames in os.walk(root):
        dirnames[:] = sorted(d for d in dirnames if not d.startswith("."))
        for name in filenames:
            if not name.endswith(".csv") or name.startswith("."):
                continue
            path = Path(dirpath) / name
            if skipped and os.path.realpath(path) in skipped:
                continue
            try:
                st = path.stat()
                digest, head = content_hash(path, st.st_size)
            except OSError:
                continue
            if head.startswith(_EXPORT_HEAD):
                continue
            out.append(Found(path.relative_to(root).as_posix(), str(path), int(st.st_size), int(st.st_mtime_ns),
                             digest, now - st.st_mtime < settle))
    out.sort(key=lambda f: f.key)
    return out


def in_progress_row(found: Found) -> Row:
    """The row of a file still being recorded: what its header says, no summary."""
    from monitor.archive.summary import utc_iso
    from monitor.recording.csvformat import read_info

    row: Row = {name: None for name in COLUMN_NAMES}
    row.update(file=found.key, status="in_progress", size=found.size, mtime_ns=found.mtime_ns,
               content_hash=found.content_hash, damage="")
    try:
        info = read_info(found.path)
        row.update(shot=info.shot, started=utc_iso(info.start), started_local=info.start, source=info.source)
    except Exception:
        pass
    return row


def _version_key(config_path: str | None) -> tuple[str, str]:
    if config_path is None:
        return "embedded", "the config embedded in each recording"
    text = Path(config_path).read_bytes()
    return f"config:{config_fingerprint(text)}", f"--config {config_path}"


def _serial(paths: list[str], config_path: str | None) -> Iterator[Row]:
    for p in paths:
        yield summarise(p, config_path)


def _pool(paths: list[str], config_path: str | None, workers: int) -> Iterator[Row]:
    from concurrent.futures import ProcessPoolExecutor, as_completed

    with ProcessPoolExecutor(max_workers=workers) as pool:
        futures = [pool.submit(summarise, p, config_path) for p in paths]
        for fut in as_completed(futures):
            yield fut.result()


def _dask(paths: list[str], config_path: str | None, scheduler: str, workers: int) -> Iterator[Row]:
    from monitor.archive.cluster import dask_rows

    yield from dask_rows(paths, config_path, scheduler, workers)


@dataclass(frozen=True)
class Plan:
    """What a build has to do against what the catalogue holds."""

    read: tuple[Found, ...]          # new or changed, to summarise
    in_progress: tuple[Found, ...]   # being recorded: (re)listed as in progress
    removed: tuple[str, ...]         # catalogued, gone from the folder
    unchanged: int
    listed_in_progress: int          # in progress now (listed before or not)

    @property
    def empty(self) -> bool:
        return not (self.read or self.in_progress or self.removed)


def plan(found: Iterable[Found], stored: dict[str, catalogue.Stored]) -> Plan:
    """Compare the folder with the catalogue: unchanged = same size, mtime and content hash."""
    read: list[Found] = []
    listed: list[Found] = []
    unchanged = in_progress = 0
    keys = set()
    for f in found:
        keys.add(f.key)
        old = stored.get(f.key)
        same = old is not None and (old.size, old.mtime_ns, old.content_hash) == (f.size, f.mtime_ns,
                                                                                     f.content_hash)
        if f.in_progress:
            in_progress += 1
            if not (same and old is not None and old.status == "in_progress"):
                listed.append(f)
        elif same and old is not None and old.status != "in_progress":
            unchanged += 1
        else:
            read.append(f)
    removed = tuple(k for k in stored if k not in keys)
    return Plan(tuple(read), tuple(listed), removed, unchanged, in_progress)


def _stored_now(root: Path, key: str) -> dict[str, catalogue.Stored] | None:
    """What the current catalogue holds for version ``key`` (read-only), or None without one."""
    try:
        db = catalogue.open_readonly(root)
    except FileNotFoundError:
        return None
    try:
        row = db.execute("SELECT version FROM versions WHERE key = ?", (key,)).fetchone()
        return None if row is None else catalogue.Writer(db, int(row[0])).stored()
    finally:
        db.close()


def build(directory: str | os.PathLike[str], *, config_path: str | None = None, workers: int = 1,
          scheduler: str | None = None, settle: float = SETTLE_S, progress: Progress | None = None,
          skip: Iterable[str] = ()) -> BuildResult:
    """Bring the catalogue's version for ``config_path`` up to date with the recordings under ``directory``.
    ``workers`` 1 summarises in this process, more on a process pool; ``scheduler`` (an address, or
    "local") on a Dask cluster. Rows are written as they finish; the catalogue changes at the end only,
    and not at all when nothing changed."""
    started = time.perf_counter()
    root = Path(directory)
    config_path = os.path.abspath(config_path) if config_path is not None else None
    key, origin = _version_key(config_path)
    found = scan(root, settle=settle, skip=skip)
    before = _stored_now(root, key)
    if before is not None:
        quick = plan(found, before)
        if quick.empty:
            db = catalogue.open_readonly(root)
            try:
                (number,) = db.execute("SELECT version FROM versions WHERE key = ?", (key,)).fetchone()
            finally:
                db.close()
            return BuildResult(int(number), len(found), 0, quick.unchanged, quick.listed_in_progress, 0, 0, 0,
                               time.perf_counter() - started)
    by_path = {os.path.abspath(f.path): f for f in found}
    with catalogue.writing(root, key, origin) as writer:
        todo = plan(found, writer.stored())
        for k in todo.removed:
            writer.remove(k)
        for f in todo.in_progress:
            writer.put(in_progress_row(f))
        paths = [os.path.abspath(f.path) for f in todo.read]
        if scheduler is not None:
            rows = _dask(paths, config_path, scheduler, workers)
        elif workers > 1 and len(paths) > 1:
            rows = _pool(paths, config_path, workers)
        else:
            rows = _serial(paths, config_path)
        done = readings = damaged = 0
        for row in rows:
            f = by_path[os.path.abspath(str(row["file"]))]
            row["file"] = f.key
            writer.put(row)
            done += 1
            readings += int(row.get("accepted") or 0)
            damaged += row.get("status") in ("damaged", "unreadable")
            if progress is not None:
                progress(done, len(paths), readings)
        version = writer.version
    return BuildResult(version, len(found), len(paths), todo.unchanged, todo.listed_in_progress, len(todo.removed),
                       damaged, readings, time.perf_counter() - started)
