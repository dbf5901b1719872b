"""Fixtures of the adapter tests; the helpers live in adapter_helpers.py beside this file."""

from __future__ import annotations

import sys
from pathlib import Path

import pytest

sys.path.insert(0, str(Path(__file__).parent))

import zmq  # noqa: E402


@pytest.fixture
def ctx() -> zmq.Context:
    """A private ZeroMQ context per test, terminated without lingering."""
    c = zmq.Context()
    yield c
    c.destroy(linger=0)


@pytest.fixture
def short_tmp(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """A short temporary directory (ipc:// paths must stay under ~100 characters)."""
    import tempfile

    d = Path(tempfile.mkdtemp(prefix="rgm"))
    yield d
    import shutil

    shutil.rmtree(d, ignore_errors=True)
