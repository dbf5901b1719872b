"""Config: defaults, units, channel map, per-key holds, and errors that name file and key (exit 2 on the CLI)."""

from __future__ import annotations

import subprocess
import sys
import textwrap
from pathlib import Path

import pytest

from monitor.config import load_config
from monitor.errors import ConfigError

# CODATA 2018 exact: k/e in eV per kelvin (via scipy.constants in the physics tests; exact by definition)
EV_PER_K = 1.380649e-23 / 1.602176634e-19


def write(tmp_path: Path, text: str, name: str = "run.toml") -> Path:
    p = tmp_path / name
    p.write_text(textwrap.dedent(text), encoding="utf-8")
    return p


def test_no_config_gives_defaults() -> None:
    c = load_config(None)
    assert c.path is None
    assert c.on_above == 1e15 and c.stale_after == 2.0 and c.max_age == 0.25
    assert c.channels.quantities() == ("ne", "Te", "Ti", "B", "p0")
    assert c.device.ion_mass_u == pytest.approx(39.948)
    assert c.hold_for("Te") == 0.25


def test_full_config_with_units(tmp_path: Path) -> None:
    p = write(tmp_path, """
        [device]
        length = "30cm"
        A = 4.0026
        Z = 1
        gas_temperature = 300
        wave_frequency = "2.45GHz"
        sigma_en = "1e-15cm^2"
        [discharge]
        on_above = "1e9cm^-3"
        [sources]
        stale_after = "1500ms"
        max_age = { default = "100ms", Te = "0.5s" }
        [channels]
        dens = { quantity = "ne", unit = "cm^-3", uncertainty = "20%" }
        temp = { quantity = "Te", unit = "K", uncertainty = "500K" }
        [pipeline]
        window = "5s"
        bins = 50
    """)
    c = load_config(p)
    assert c.path == str(p)
    assert c.device.length == pytest.approx(0.3)
    assert c.device.ion_mass_u == pytest.approx(4.0026)
    assert c.device.wave_frequency == pytest.approx(2.45e9)
    assert c.device.sigma_en == pytest.approx(1e-19)
    assert c.on_above == pytest.approx(1e15)
    assert c.stale_after == pytest.approx(1.5)
    assert c.max_age == pytest.approx(0.1)
    assert c.hold_for("Te") == pytest.approx(0.5) and c.hold_for("ne") == pytest.approx(0.1)
    dens = c.channels.channels["dens"]
    assert dens.quantity == "ne" and dens.scale == pytest.approx(1e6) and dens.sigma_rel == pytest.approx(0.2)
    temp = c.channels.channels["temp"]
    assert temp.scale == pytest.approx(EV_PER_K) and temp.sigma_abs == pytest.approx(500 * EV_PER_K)
    # the identity defaults stay beside the configured keys, after them
    assert list(c.channels.channels)[:2] == ["dens", "temp"] and "ne" in c.channels.channels
    assert c.pipeline.window == 5.0 and c.pipeline.bins == 50


@pytest.mark.parametrize("text, key", [
    ("[devices]\nlength = 1\n", "devices"),
    ("[device]\nlenght = 0.3\n", "device.lenght"),
    ("[device]\nlength = \"30 parsecs\"\n", "device.length"),
    ("[device]\nlength = -1\n", "device.length"),
    ("[discharge]\non_above = \"1e15 furlongs\"\n", "discharge.on_above"),
    ("[sources]\nstale_after = 0\n", "sources.stale_after"),
    ("[sources]\nmax_age = { Tx = 1 }\n", "sources.max_age.Tx"),
    ("[channels]\ndens = { quantity = \"density\" }\n", "channels.dens.quantity"),
    ("[channels]\ndens = { quantity = \"ne\", unit = \"kg\" }\n", "channels.dens.unit"),
    ("[channels]\ndens = { quantity = \"ne\", uncertainty = \"lots\" }\n", "channels.dens.uncertainty"),
    ("[channels]\ndens = { quantity = \"ne\", scale = 2 }\n", "channels.dens.scale"),
    ("[channels]\ndens = { unit = \"cm^-3\" }\n", "channels.dens.quantity"),
    ("[pipeline]\nbins = 0\n", "pipeline.bins"),
    ("[device\n", "(syntax)"),
])
def test_errors_name_file_and_key(tmp_path: Path, text: str, key: str) -> None:
    p = write(tmp_path, text)
    with pytest.raises(ConfigError) as info:
        load_config(p)
    assert info.value.key == key
    assert str(p) in str(info.value) and key in str(info.value)


def test_missing_file_is_a_config_error(tmp_path: Path) -> None:
    with pytest.raises(ConfigError) as info:
        load_config(tmp_path / "absent.toml")
    assert "absent.toml" in str(info.value)


def test_limit_and_alarm_tables_reach_their_parsers(tmp_path: Path) -> None:
    import monitor.alarms.envelope  # noqa: F401 - fails loudly if the module is broken
    p = write(tmp_path, """
        [[limit]]
        name = "debye-long"
        quantity = "debye_length"
        high = "40um"
        [alarms]
        flood_count = 12
    """)
    c = load_config(p)
    assert [lim.name for lim in c.limits] == ["debye-long"]
    assert c.limits[0].high == pytest.approx(4e-5)
    assert c.alarms.flood_count == 12
    bad = write(tmp_path, "[[limit]]\nname = \"x\"\nquantity = \"no_such_thing\"\nhigh = 1\n", "bad.toml")
    with pytest.raises(ConfigError) as info:      # the alarm parser's errors propagate
        load_config(bad)
    assert "bad.toml" in str(info.value)


def test_recording_table_reaches_its_parser(tmp_path: Path) -> None:
    import monitor.recording_options  # noqa: F401 - fails loudly if the module is broken
    c = load_config(write(tmp_path, "[recording]\npre_trigger = \"500ms\"\n"))
    assert c.recording.pre_trigger == pytest.approx(0.5)
    with pytest.raises(ConfigError):
        load_config(write(tmp_path, "[recording]\nno_such_option = 1\n", "r2.toml"))


def test_cli_exits_2_naming_file_and_key(tmp_path: Path) -> None:
    p = write(tmp_path, "[channels]\ntemp = { quantity = \"Te\", unit = \"furlong\" }\n")
    out = subprocess.run([sys.executable, "-m", "monitor", "watch", "sim:steady", "--headless",
                          "--config", str(p), "--duration", "1"],
                         capture_output=True, text=True, timeout=60)
    assert out.returncode == 2, out.stderr
    assert str(p) in out.stderr and "channels.temp.unit" in out.stderr
    assert out.stdout == ""


# issue 12 point 9: device constants outside a physical range are refused with the file and the key named
@pytest.mark.parametrize("toml, key", [
    ("[device]\nZ = 1.5\n", "device.Z"),
    ("[device]\nZ = 99999999999999999999\n", "device.Z"),
    ("[device]\nlength = 1e308\n", "device.length"),
    ("[device]\nlength = \"1e-12 m\"\n", "device.length"),
    ("[device]\nA = 1e-30\n", "device.A"),
    ("[device]\ngas_temperature = \"1e9 K\"\n", "device.gas_temperature"),
    ("[device]\nsigma_en = 1.0\n", "device.sigma_en"),
    ("[device]\nwave_frequency = \"1e30 Hz\"\n", "device.wave_frequency"),
    ("[sources]\nstale_after = \"1e300 s\"\n", "sources.stale_after"),
    ("[sources.max_age]\nne = 1e300\n", "sources.max_age.ne"),
    ("[pipeline]\nwindow = 1e300\n", "pipeline.window"),
    ("[discharge]\non_above = 1e300\n", "discharge.on_above"),
])
def test_implausible_values_are_refused_naming_file_and_key(tmp_path: Path, toml: str, key: str) -> None:
    path = tmp_path / "bad.toml"
    path.write_text(toml)
    with pytest.raises(ConfigError) as err:
        load_config(path)
    assert err.value.key == key and str(path) in str(err.value)


def test_plausible_device_values_are_kept(tmp_path: Path) -> None:
    path = tmp_path / "ok.toml"
    path.write_text("[device]\nZ = 2\nA = 1.007\nlength = \"2 mm\"\nsigma_en = 3e-20\n")
    d = load_config(path).device
    assert (d.ion_charge, d.ion_mass_u, d.length, d.sigma_en) == (2, 1.007, 0.002, 3e-20)


# issue 12 point 6: a config file is read with a stated bound (/dev/zero returns at once)
def test_config_read_is_bounded(tmp_path: Path) -> None:
    from monitor.config import MAX_CONFIG_BYTES

    with pytest.raises(ConfigError, match="larger than"):
        load_config("/dev/zero")
    big = tmp_path / "big.toml"
    big.write_text("# padding\n" * (MAX_CONFIG_BYTES // 10 + 1))
    with pytest.raises(ConfigError, match="larger than"):
        load_config(big)
    with pytest.raises(ConfigError, match="directory"):
        load_config(tmp_path)
