"""Hostile serial input on a real pseudo-terminal: CR-only line ends, an oversized line, every line counted."""

from __future__ import annotations

import os
from pathlib import Path
from typing import Iterator

import pytest

from adapter_helpers import drain
from adapters.serial_line import SerialSource


@pytest.fixture
def pty(short_tmp: Path) -> Iterator[tuple[int, Path]]:
    master, slave = os.openpty()
    link = short_tmp / "ttyH0"
    link.symlink_to(os.ttyname(slave))
    os.close(slave)
    yield master, link
    os.close(master)


def _write(fd: int, data: bytes) -> None:
    view = memoryview(data)
    while view:
        view = view[os.write(fd, view):]


# point 3: an instrument that ends its lines with CR only used to give accepted 0, oversized 1
def test_cr_only_lines_over_a_pty_all_arrive(pty: tuple[int, Path]) -> None:
    master, link = pty
    src = SerialSource(str(link), baud=921600)
    src.open()
    try:
        assert src.connected.wait(5)
        n = 2000
        for lo in range(0, n, 250):
            _write(master, b"".join(b"seq=%d ne=%d\r" % (i, 10**16 + i) for i in range(lo, lo + 250)))
        d = drain(src, lambda d: d.readings + len(d.rejections) >= n, timeout=15)
        assert d.rejections == [] and d.readings == n
        assert d.seqs().tolist() == list(range(n))
    finally:
        src.close()


def test_oversized_and_cut_lines_carry_count_and_seq(pty: tuple[int, Path]) -> None:
    master, link = pty
    src = SerialSource(str(link), baud=921600, max_line=64)
    src.open()
    try:
        assert src.connected.wait(5)
        _write(master, b"seq=1 ne=1\rseq=2 ne=" + b"9" * 200 + b"\r\nseq=3 ne=3\r")
        d = drain(src, lambda d: d.readings + len(d.rejections) >= 3, timeout=10)
        assert d.seqs().tolist() == [1, 3]
        assert [(r.reason, r.count, r.seq_first, r.seq_last) for r in d.rejections] == [("oversized", 1, 2, 2)]
    finally:
        src.close()


# "no input tried can make the tool hang": a path that is no terminal is not retried for ever
@pytest.mark.parametrize("path", ["/dev/zero", "/dev/null"])
def test_a_device_that_is_no_serial_port_fails_at_once(path: str) -> None:
    import time

    from adapters.base import FatalSourceError, LinkState

    src = SerialSource(path)
    src.open()
    try:
        deadline = time.monotonic() + 5
        while src.status().state is not LinkState.FAILED and time.monotonic() < deadline:
            time.sleep(0.02)
        assert src.status().state is LinkState.FAILED and "not a serial port" in src.status().message
        with pytest.raises(FatalSourceError):
            src.poll(0.01)
    finally:
        src.close()
