"""Fixtures of the recording tests; the plain helpers live in recording_helpers.py."""

from __future__ import annotations

from pathlib import Path

import pytest

from recording_helpers import ENVELOPE


@pytest.fixture
def envelope(tmp_path: Path) -> Path:
    p = tmp_path / "envelope.toml"
    p.write_text(ENVELOPE, encoding="utf-8")
    return p
