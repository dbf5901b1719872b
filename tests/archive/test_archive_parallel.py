"""The same catalogue rows from the serial path, a process pool of two and a Dask LocalCluster of two worker processes."""

from __future__ import annotations

from pathlib import Path

import pytest
from make_shots import ROOT

from monitor.archive import catalogue
from monitor.archive.build import build


def _rows(folder: Path, version: int) -> list[dict[str, object]]:
    db = catalogue.open_readonly(folder)
    try:
        rows = catalogue.select(db, version)
    finally:
        db.close()
    for r in rows:
        del r["built"]              # the build's timestamp: the only column allowed to differ
    return rows


def test_serial_pool_and_dask_rows_are_identical(shots: Path, tmp_path: Path) -> None:
    pytest.importorskip("distributed")
    config = str(ROOT / "replay_data" / "argon_rf_envelope.toml")
    results = {}
    for how, kwargs in (("serial", {"workers": 1}), ("pool", {"workers": 2}),
                        ("dask", {"workers": 2, "scheduler": "local"})):
        catalogue_file = shots / catalogue.CATALOGUE
        if catalogue_file.exists():
            catalogue_file.unlink()
        res = build(shots, config_path=config, **kwargs)   # type: ignore[arg-type]
        assert res.read == 6
        results[how] = _rows(shots, res.version)
    assert len(results["serial"]) == 6
    assert results["pool"] == results["serial"]
    assert results["dask"] == results["serial"]
