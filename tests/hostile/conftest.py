"""Fixtures of the hostile-input tests: a private ZeroMQ context, a short temporary directory, the adapter helpers."""

from __future__ import annotations

import shutil
import sys
import tempfile
from pathlib import Path
from typing import Iterator

import pytest
import zmq

sys.path.insert(0, str(Path(__file__).parent.parent / "adapters"))     # adapter_helpers


@pytest.fixture
def ctx() -> Iterator[zmq.Context]:
    c = zmq.Context()
    yield c
    c.destroy(linger=0)


@pytest.fixture
def short_tmp() -> Iterator[Path]:
    d = Path(tempfile.mkdtemp(prefix="rgh"))
    yield d
    shutil.rmtree(d, ignore_errors=True)
