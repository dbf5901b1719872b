"""Fixtures of the archive tests: a folder of recordings (the demo shots and invented ones), settled in time."""

from __future__ import annotations

import os
import shutil
import sys
import time
from pathlib import Path

import pytest

sys.path.insert(0, str(Path(__file__).parent))

from make_shots import write_shot  # noqa: E402

ROOT = Path(__file__).resolve().parents[2]
DEMO = ROOT / "replay_data"


def settle(folder: Path, age: float = 120.0) -> None:
    """Date the files written in the last minute back by ``age`` s, so that none looks still being
    recorded (older files keep their time: a re-run must see them unchanged)."""
    now = time.time()
    for f in folder.rglob("*"):
        if f.is_file() and f.stat().st_mtime > now - 60:
            os.utime(f, (now - age, now - age))


@pytest.fixture
def shots(tmp_path: Path) -> Path:
    """The two demo shots (with journals) and four invented 5 s shots in a subfolder."""
    folder = tmp_path / "shots"
    folder.mkdir()
    for f in DEMO.iterdir():
        if f.suffix in (".csv", ".jsonl"):
            shutil.copy(f, folder / f.name)
    for n in range(1, 5):
        write_shot(folder / "day2", n, seconds=5.0, rate=500.0)
    settle(folder)
    return folder
