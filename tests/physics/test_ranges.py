"""Each input's stated physical range: calc refuses outside it with exit 2 and a message naming the range."""

from __future__ import annotations

import math
import subprocess
import sys
from pathlib import Path

import pytest

from monitor.cli import main
from monitor.model import Device
from monitor.physics.ranges import DEVICE_FIELDS, RANGES, check_value, out_of_range

SCRIPT = Path(sys.executable).with_name("regime")


@pytest.mark.parametrize(("args", "key"), [
    (["ne=1e17", "Te=3", "A=1e-30"], "A"),
    (["ne=1e17", "Te=3", "p0=1", "sigma_en=0"], "sigma_en"),
    (["ne=1e-300", "Te=1e-300"], "ne"),
    (["ne=1e17", "Te=1e-300"], "Te"),
    (["ne=1e17", "Te=3", "Z=1.5"], "Z"),
    (["ne=1e17", "Te=3", "Z=99999999999999999999"], "Z"),
    (["ne=1e17", "Te=3", "L=1e308"], "L"),
    (["ne=1e17", "Te=3", "B=1e-200"], "B"),
    (["ne=1e17", "Te=3", "p0=-1Pa"], "p0"),
    (["ne=1e17", "Te=3", "f=1e30"], "f"),
    (["ne=1e17", "Te=3", "Tgas=0K"], "Tgas"),
    (["ne=1e17", "Te=3", "Ti=inf"], "Ti"),
])
def test_calc_refuses_outside_the_range(capsys: pytest.CaptureFixture[str], args: list[str], key: str) -> None:
    assert main(["calc", *args]) == 2
    err = capsys.readouterr().err
    assert err.startswith(f"regime calc: {key} = ") and "outside its physical range" in err
    assert RANGES[key].describe() in err


def test_installed_script_exit_code_for_a_tiny_ion_mass() -> None:
    out = subprocess.run([str(SCRIPT), "calc", "ne=1e17", "Te=3", "A=1e-30"], capture_output=True, text=True,
                         timeout=60)
    assert out.returncode == 2 and out.stdout == ""
    assert "A = 1e-30 u is outside its physical range" in out.stderr


@pytest.mark.parametrize("args", [
    ["ne=1e17", "Te=3", "B=0"],                  # a field switched off
    ["ne=1e17", "Te=3", "p0=0"],                 # no gas
    ["ne=1e17", "Te=3", "B=-2T"],                # the field's sign does not matter
    ["ne=1e17", "Te=3", "A=5.48579909e-4"],      # a positron (CODATA electron mass in u)
    ["ne=1e17", "Te=3", "Z=2", "A=4.0026"],
])
def test_calc_accepts_the_edges_inside(capsys: pytest.CaptureFixture[str], args: list[str]) -> None:
    assert main(["calc", "--json", *args]) == 0


def test_ranges_cover_every_device_field_and_are_ordered() -> None:
    fields = {f for f in Device.__dataclass_fields__}
    assert set(DEVICE_FIELDS) <= fields
    for key, r in RANGES.items():
        assert 0 < r.low < r.high and r.why, key
        assert out_of_range(key, math.nan) and out_of_range(key, math.inf)
        assert check_value(key, r.low) is None and check_value(key, r.high) is None
    assert check_value("Z", 2.0) is None and check_value("Z", 2.5) is not None
