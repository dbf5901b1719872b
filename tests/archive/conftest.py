"""Fixtures of the archive tests: a folder of recordings (the demo shots and invented ones), settled in time."""

from __future__ import annotations

import shutil
import sys
from pathlib import Path

import pytest

sys.path.insert(0, str(Path(__file__).parent))

from make_shots import DEMO, settle, write_shot  # noqa: E402


@pytest.fixture
def shots(tmp_path: Path) -> Path:
    """The two demo shots (with journals) and four invented 5 s shots in a subfolder."""
    folder = tmp_path / "shots"
    folder.mkdir()
    for f in DEMO.iterdir():       # the two recorded demo shots (replay_data also holds raw diagnostic files)
        if f.suffix in (".csv", ".jsonl") and f.name.startswith(("argon_rf_excursion", "helium_microwave_cutoff")):
            shutil.copy(f, folder / f.name)
    for n in range(1, 5):
        write_shot(folder / "day2", n, seconds=5.0, rate=500.0)
    settle(folder)
    return folder
