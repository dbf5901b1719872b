"""Fixtures of the pipeline tests; the helpers live in pipeline_helpers.py beside this file."""

from __future__ import annotations

import sys
from pathlib import Path

import pytest

sys.path.insert(0, str(Path(__file__).parent))

from pipeline_helpers import CollectSink  # noqa: E402


@pytest.fixture
def collect() -> CollectSink:
    return CollectSink()
