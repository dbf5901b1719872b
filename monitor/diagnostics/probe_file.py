"""Reading a sweep file of any of our formats (CSV, JSON lines, text lines) and analysing all its sweeps."""

from __future__ import annotations

import time
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from adapters.batch import Rejection
from adapters.sweeps import SweepBlock, parse_sweep_csv, parse_sweep_json, parse_sweep_line
from monitor.diagnostics.probe import ProbeResults, analyse_sweeps
from monitor.diagnostics.probe_spec import ProbeSpec

__all__ = ["read_sweeps", "SweepFile", "analyse_file", "merge_blocks"]


@dataclass(frozen=True)
class SweepFile:
    """A file's sweeps (blocks of equal length), the parser's refusals, and every sweep's results."""

    blocks: tuple[SweepBlock, ...]
    rejections: tuple[Rejection, ...]
    results: tuple[ProbeResults, ...]


def read_sweeps(data: bytes, source: str) -> tuple[list[SweepBlock], list[Rejection]]:
    """Sniff the format from the first line that is not a comment: ``{`` JSON lines, ``sweep=``/``V=``
    text lines, anything else CSV with a header row."""
    received = time.time()
    first = next((ln.strip() for ln in data.split(b"\n") if ln.strip() and not ln.strip().startswith(b"#")), b"")
    if not first.startswith(b"{") and b"=" not in first.split(b" ", 1)[0]:
        return parse_sweep_csv(data, source, received)
    blocks: list[SweepBlock] = []
    rejections: list[Rejection] = []
    parse = parse_sweep_json if first.startswith(b"{") else parse_sweep_line
    for ln in data.split(b"\n"):                      # one sweep per line: a loop over sweeps, not points
        if not ln.strip() or ln.strip().startswith(b"#"):
            continue
        got = parse(ln.strip(), source, received)
        if isinstance(got, Rejection):
            rejections.append(got)
        else:
            blocks.append(got)
    return merge_blocks(blocks), rejections


def merge_blocks(blocks: list[SweepBlock]) -> list[SweepBlock]:
    """Blocks of equal sweep length joined into one block each (order of first appearance kept)."""
    by_n: dict[int, list[SweepBlock]] = {}
    for b in blocks:
        by_n.setdefault(int(b.V.shape[1]), []).append(b)
    out = []
    for group in by_n.values():
        if len(group) == 1:
            out.append(group[0])
            continue
        out.append(SweepBlock(group[0].source, np.concatenate([b.sweep for b in group]),
                              np.concatenate([b.t for b in group]), np.concatenate([b.V for b in group]),
                              np.concatenate([b.I for b in group])))
    return out


def analyse_file(path: str | Path, spec: ProbeSpec) -> SweepFile:
    """Read and analyse every sweep of a file (OSError propagates for the caller to report)."""
    data = Path(path).read_bytes()
    blocks, rejections = read_sweeps(data, str(path))
    results = tuple(analyse_sweeps(b.V, b.I, spec, sweep=b.sweep, t=b.t) for b in blocks)
    return SweepFile(tuple(blocks), tuple(rejections), results)
