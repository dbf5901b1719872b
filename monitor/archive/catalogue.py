"""The catalogue file: SQLite in the archive directory, rebuilt in a temporary copy and swapped in with os.replace."""

from __future__ import annotations

import contextlib
import csv
import datetime as _dt
import fcntl
import os
import sqlite3
import tempfile
from dataclasses import dataclass
from pathlib import Path
from typing import IO, Iterator, Sequence

from monitor.archive.columns import COLUMNS, COLUMN_NAMES
from monitor.archive.summary import Row, Value
from monitor.archive.where import Condition

__all__ = ["CATALOGUE", "SCHEMA", "Version", "Stored", "CatalogueBusy", "Writer", "writing", "open_readonly",
           "versions", "latest_version", "select", "export_csv", "utc_now"]

CATALOGUE = "regime-catalogue.sqlite"
_LOCK = ".regime-catalogue.lock"
_TEMP_PREFIX = ".regime-catalogue-"
SCHEMA = 1
_COMMIT_EVERY = 200            # rows between commits into the temporary copy (bounds its journal)


class CatalogueBusy(RuntimeError):
    """Another build holds the archive's lock."""


@dataclass(frozen=True)
class Version:
    """One analysis of the archive: the config it used (``key``: "embedded" or "config:<fingerprint>")."""

    number: int
    key: str
    config_origin: str
    created: str
    updated: str


@dataclass(frozen=True)
class Stored:
    """What the catalogue remembers of a file, to tell whether it changed."""

    size: int
    mtime_ns: int
    content_hash: str
    status: str


def utc_now() -> str:
    return _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds")


def _create(db: sqlite3.Connection) -> None:
    cols = ", ".join(f'"{c.name}" {c.sql}' for c in COLUMNS)
    db.executescript(f"""
        CREATE TABLE IF NOT EXISTS meta (key TEXT PRIMARY KEY, value TEXT);
        CREATE TABLE IF NOT EXISTS versions (version INTEGER PRIMARY KEY, key TEXT UNIQUE NOT NULL,
            config_origin TEXT, created TEXT, updated TEXT);
        CREATE TABLE IF NOT EXISTS shots (version INTEGER NOT NULL, {cols}, PRIMARY KEY (version, file));
        CREATE TABLE IF NOT EXISTS alarms (version INTEGER NOT NULL, file TEXT NOT NULL, name TEXT NOT NULL,
            raised INTEGER NOT NULL, PRIMARY KEY (version, file, name));
        CREATE INDEX IF NOT EXISTS alarms_by_name ON alarms (version, name);
    """)
    db.execute("INSERT OR REPLACE INTO meta VALUES ('schema', ?)", (str(SCHEMA),))


class Writer:
    """Updates one version of the catalogue inside the temporary copy; ``writing`` swaps it in."""

    def __init__(self, db: sqlite3.Connection, version: int) -> None:
        self.db = db
        self.version = version
        self._since_commit = 0
        names = ", ".join(f'"{c}"' for c in COLUMN_NAMES)
        marks = ", ".join("?" for _ in COLUMN_NAMES)
        self._insert = f"INSERT OR REPLACE INTO shots (version, {names}) VALUES (?, {marks})"

    def stored(self) -> dict[str, Stored]:
        rows = self.db.execute("SELECT file, size, mtime_ns, content_hash, status FROM shots WHERE version = ?",
                               (self.version,))
        return {f: Stored(int(s or 0), int(m or 0), str(h or ""), str(st or "")) for f, s, m, h, st in rows}

    def put(self, row: Row) -> None:
        """Insert or replace ``row`` (its ``file`` the key) with its alarms, stamped with the build time."""
        values = dict(row)
        values["built"] = utc_now()
        self.db.execute(self._insert, (self.version, *(values.get(c) for c in COLUMN_NAMES)))
        file = str(values["file"])
        self.db.execute("DELETE FROM alarms WHERE version = ? AND file = ?", (self.version, file))
        for item in str(values.get("alarm_names") or "").split(";"):
            name, _, n = item.rpartition("=")
            if name:
                self.db.execute("INSERT INTO alarms VALUES (?, ?, ?, ?)", (self.version, file, name, int(n)))
        self._tick()

    def remove(self, file: str) -> None:
        self.db.execute("DELETE FROM shots WHERE version = ? AND file = ?", (self.version, file))
        self.db.execute("DELETE FROM alarms WHERE version = ? AND file = ?", (self.version, file))
        self._tick()

    def _tick(self) -> None:
        self._since_commit += 1
        if self._since_commit >= _COMMIT_EVERY:
            self.db.commit()
            self._since_commit = 0


def _clean_temps(directory: Path) -> None:
    for stale in directory.glob(_TEMP_PREFIX + "*"):
        with contextlib.suppress(OSError):
            stale.unlink()


@contextlib.contextmanager
def writing(directory: str | os.PathLike[str], key: str, config_origin: str) -> Iterator[Writer]:
    """A Writer on a temporary copy of the catalogue for the version ``key`` (made if new). On a clean
    exit the copy replaces the catalogue in one os.replace; on an exception or a kill the catalogue
    stays as it was (the copy is removed, or left for the next build to remove). One build at a time
    (an flock on a lock file beside it)."""
    folder = Path(directory)
    final = folder / CATALOGUE
    with open(folder / _LOCK, "a+b") as lock:
        try:
            fcntl.flock(lock.fileno(), fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            raise CatalogueBusy(f"{folder}: another `regime archive` is building this catalogue") from None
        _clean_temps(folder)
        fd, tmp_name = tempfile.mkstemp(prefix=_TEMP_PREFIX, suffix=".tmp", dir=folder)
        os.close(fd)
        tmp = Path(tmp_name)
        db = sqlite3.connect(tmp)
        try:
            if final.is_file():
                src = sqlite3.connect(f"{final.resolve().as_uri()}?mode=ro", uri=True)
                try:
                    src.backup(db)
                finally:
                    src.close()
            _create(db)
            now = utc_now()
            db.execute("INSERT OR IGNORE INTO versions (key, config_origin, created, updated) VALUES (?, ?, ?, ?)",
                       (key, config_origin, now, now))
            db.execute("UPDATE versions SET updated = ?, config_origin = ? WHERE key = ?", (now, config_origin, key))
            (number,) = db.execute("SELECT version FROM versions WHERE key = ?", (key,)).fetchone()
            writer = Writer(db, int(number))
            yield writer
            db.commit()
            db.close()
            with open(tmp, "rb") as fh:
                os.fsync(fh.fileno())
            os.replace(tmp, final)
            dfd = os.open(folder, os.O_RDONLY)
            try:
                os.fsync(dfd)
            finally:
                os.close(dfd)
        except BaseException:
            db.close()
            with contextlib.suppress(OSError):
                tmp.unlink()
            raise


def open_readonly(directory: str | os.PathLike[str]) -> sqlite3.Connection:
    """The catalogue opened read-only (a ``file:...?mode=ro`` URI): no statement can change it."""
    path = Path(directory) / CATALOGUE
    if not path.is_file():
        raise FileNotFoundError(f"{directory}: no catalogue ({CATALOGUE}); run `regime archive {directory}` first")
    return sqlite3.connect(f"{path.resolve().as_uri()}?mode=ro", uri=True)


def versions(db: sqlite3.Connection) -> list[Version]:
    rows = db.execute("SELECT version, key, config_origin, created, updated FROM versions ORDER BY version")
    return [Version(int(n), str(k), str(o or ""), str(c or ""), str(u or "")) for n, k, o, c, u in rows]


def latest_version(db: sqlite3.Connection) -> int | None:
    row = db.execute("SELECT version FROM versions ORDER BY updated DESC, version DESC LIMIT 1").fetchone()
    return None if row is None else int(row[0])


def select(db: sqlite3.Connection, version: int, condition: Condition | None = None,
           sort: Sequence[tuple[str, bool]] = (), limit: int | None = None,
           columns: Sequence[str] = COLUMN_NAMES) -> list[dict[str, Value]]:
    """Rows of ``version`` matching ``condition``, sorted by (column, descending) pairs (whitelisted
    columns only, then by file), at most ``limit``. Every value is a bound parameter."""
    for name in (*columns, *(c for c, _ in sort)):
        if name not in COLUMN_NAMES:
            raise ValueError(f"no column {name!r}")
    names = ", ".join(f'"{c}"' for c in columns)
    sql = f"SELECT {names} FROM shots WHERE version = ?"
    params: list[Value] = [version]
    if condition is not None:
        sql += f" AND {condition.sql}"
        params += list(condition.params)
    order = [f'"{c}" {"DESC" if desc else "ASC"}' for c, desc in sort] + ['"file" ASC']
    sql += " ORDER BY " + ", ".join(order)
    if limit is not None:
        sql += " LIMIT ?"
        params.append(int(limit))
    return [dict(zip(columns, r)) for r in db.execute(sql, params)]


def export_csv(rows: Sequence[dict[str, Value]], out: IO[str], columns: Sequence[str] = COLUMN_NAMES) -> None:
    """Rows as CSV with a header row (empty cells for NULL)."""
    w = csv.writer(out, lineterminator="\n")
    w.writerow(columns)
    for r in rows:
        w.writerow(["" if r.get(c) is None else r.get(c) for c in columns])
