"""The [[limit]] and [alarms] contract: values with units, defaults, and errors that name file and key."""

from __future__ import annotations

from pathlib import Path

import pytest

from monitor.alarms.envelope import parse_alarm_options, parse_limits
from monitor.alarms.events import Priority
from monitor.cli import main
from monitor.errors import ConfigError

ISSUE_EXAMPLE = """
[device]
length = 0.3
[discharge]
on_above = 1e15
[sources]
stale_after = 2.0
[[limit]]
name = "debye-long"
quantity = "debye_length"
high = 4.0e-5
deadband = 0.05
on_delay = 0.5
off_delay = 0.0
latch = false
priority = "high"
description = "sheath thicker than the probe tip"
"""


def _one(**kw):
    table = {"name": "x", "quantity": "Te", "high": 5.0, **kw}
    return parse_limits([table], "env.toml")[0]


def test_the_documented_example_parses() -> None:
    import tomllib

    (lim,) = parse_limits(tomllib.loads(ISSUE_EXAMPLE)["limit"], "env.toml")
    assert (lim.name, lim.quantity, lim.high, lim.low) == ("debye-long", "debye_length", 4.0e-5, None)
    assert lim.band(lim.high) == pytest.approx(2.0e-6) and lim.on_delay == 0.5 and not lim.latch
    assert lim.priority is Priority.HIGH and lim.description.startswith("sheath")


# unit factors are common practice: 1 G = 1e-4 T, 1 Torr = 101325/760 Pa, 1 eV = 11604.5 K
@pytest.mark.parametrize("quantity, raw, canonical", [
    ("debye_length", "40um", 40e-6), ("debye_length", "0.004 cm", 4e-5),
    ("ne", "5e16 cm^-3", 5e22), ("ne", 1e17, 1e17), ("Te", "500 meV", 0.5), ("Te", "11604.5 K", 1.0000),
    ("B", "500 G", 0.05), ("p0", "10 mTorr", 1.33322), ("electron_plasma_frequency", "2 Grad/s", 2e9),
    ("electron_ion_collision_frequency", "3 MHz", 3e6), ("electron_mean_speed", "1000 km/s", 1e6),
    ("ionization_fraction", "5%", 0.05), ("knudsen_number", 0.3, 0.3), ("electron_density", 1e16, 1e16),
])
def test_limits_with_units_become_canonical(quantity: str, raw, canonical: float) -> None:
    lim = parse_limits([{"name": "x", "quantity": quantity, "high": raw}], "env.toml")[0]
    assert lim.high == pytest.approx(canonical, rel=1e-4)   # unit factors: monitor.units (CODATA k/e for K)


def test_deadband_forms_and_durations() -> None:
    assert _one(deadband="10%").band(5.0) == pytest.approx(0.5)
    assert _one(deadband="0.2 eV").band(5.0) == pytest.approx(0.2)
    assert _one(deadband_absolute=0.3).band(5.0) == pytest.approx(0.3)
    lim = _one(on_delay="250ms", off_delay="1 min", realarm_after=30, max_shelve="2 min", predict_within="5s")
    assert (lim.on_delay, lim.off_delay, lim.realarm_after, lim.max_shelve, lim.predict_within) == \
        (0.25, 60.0, 30.0, 120.0, 5.0)
    assert _one(uncertainty="certain", k=3).k == 3.0


@pytest.mark.parametrize("table, key, words", [
    ({"colour": "red"}, "limit[0] (x).colour", "unknown key"),
    ({"quantity": "debye_lenght"}, "limit[0] (x).quantity", "unknown quantity"),
    ({"low": 6.0}, "limit[0] (x).low", "impossible limits"),
    ({"low": 5.0}, "limit[0] (x).low", "impossible limits"),
    ({"high": "5 parsec"}, "limit[0] (x).high", "unknown unit"),
    ({"high": "fast"}, "limit[0] (x).high", "cannot read"),
    ({"high": True}, "limit[0] (x).high", "expected a number"),
    ({"quantity": "electron_plasma_frequency", "high": "3 GHz"}, "limit[0] (x).high", "accepted units"),
    ({"deadband": 1.5}, "limit[0] (x).deadband", "[0, 1)"),
    ({"deadband": 0.1, "deadband_absolute": 0.1}, "limit[0] (x).deadband", "not both"),
    ({"low": 4.9, "deadband": 0.05}, "limit[0] (x).deadband", "wider than the gap"),
    ({"on_delay": -1}, "limit[0] (x).on_delay", "non-negative"),
    ({"on_delay": "2 furlongs"}, "limit[0] (x).on_delay", "unknown unit"),
    ({"priority": "critical"}, "limit[0] (x).priority", "unknown priority"),
    ({"latch": "yes"}, "limit[0] (x).latch", "true or false"),
    ({"uncertainty": "maybe"}, "limit[0] (x).uncertainty", "certain"),
    ({"high": "4 eV +- 1 eV"}, "limit[0] (x).high", "no uncertainty"),
    ({"predict_within": 0}, "limit[0] (x).predict_within", "positive"),
])
def test_limit_errors_name_file_and_key(table: dict, key: str, words: str) -> None:
    with pytest.raises(ConfigError) as info:
        _one(**table)
    err = info.value
    assert err.path == "env.toml" and err.key == key and words in err.message, str(err)


def test_structural_errors() -> None:
    with pytest.raises(ConfigError, match="needs a name"):
        parse_limits([{"quantity": "Te", "high": 1.0}], "e.toml")
    with pytest.raises(ConfigError, match="high, low or both"):
        parse_limits([{"name": "a", "quantity": "Te"}], "e.toml")
    with pytest.raises(ConfigError, match="duplicate alarm name"):
        parse_limits([{"name": "a", "quantity": "Te", "high": 1.0}] * 2, "e.toml")
    with pytest.raises(ConfigError, match=r"\[\[limit\]\]"):
        parse_limits({"name": "a"}, "e.toml")
    assert parse_limits(None, "e.toml") == ()


def test_alarm_options_and_their_errors() -> None:
    d = parse_alarm_options(None, "e.toml")
    # defaults: the flood and chattering figures of ANSI/ISA-18.2 as the project's issue states them (from memory)
    assert (d.flood_count, d.flood_clear, d.flood_window, d.chatter_count, d.chatter_window) == (10, 5, 600.0, 3, 60.0)
    o = parse_alarm_options({"max_shelve": "30 min", "stale_priority": "urgent", "bell": True,
                             "hooks": {"urgent": {"command": ["notify", "{alarm}"], "timeout": "2s"}}}, "e.toml")
    assert o.max_shelve == 1800.0 and o.stale_priority is Priority.URGENT and o.bell
    assert o.hooks[Priority.URGENT].command == ("notify", "{alarm}") and o.hooks[Priority.URGENT].timeout == 2.0
    for table, key in [({"flood": 3}, "alarms.flood"), ({"flood_count": 0}, "alarms.flood_count"),
                       ({"flood_clear": 20}, "alarms.flood_clear"), ({"quality_above": 2}, "alarms.quality_above"),
                       ({"quality_below": 0.5}, "alarms.quality_below"), ({"bell": 1}, "alarms.bell")]:
        with pytest.raises(ConfigError) as info:
            parse_alarm_options(table, "e.toml")
        assert info.value.key == key


def test_regime_check_summarises_a_good_file(tmp_path: Path, capsys) -> None:
    path = tmp_path / "env.toml"
    path.write_text(ISSUE_EXAMPLE + '\n[[limit]]\nname = "hot"\nquantity = "Te"\nhigh = "8 eV"\nlatch = true\n')
    assert main(["check", str(path)]) == 0
    out = capsys.readouterr().out
    assert "ok, 2 limits" in out and "debye-long: debye_length high 4e-05 m" in out and "latching" in out


def test_regime_check_says_where_watch_will_write(tmp_path: Path, capsys) -> None:
    import json

    path = tmp_path / "env.toml"
    path.write_text(ISSUE_EXAMPLE + '\n[alarms]\njournal = "shift.jsonl"\n[recording]\ndirectory = "shots"\n')
    assert main(["check", str(path)]) == 0
    out = capsys.readouterr().out
    assert f"alarm journal: {tmp_path / 'shift.jsonl'}" in out and "records into:" in out and "shots" in out
    assert main(["check", str(path), "--json"]) == 0
    got = json.loads(capsys.readouterr().out)
    assert got["journal"] == str(tmp_path / "shift.jsonl") and got["recording_directory"].endswith("shots")


def test_regime_check_exits_2_naming_file_and_key(tmp_path: Path, capsys) -> None:
    path = tmp_path / "bad.toml"
    path.write_text(ISSUE_EXAMPLE.replace('quantity = "debye_length"', 'quantity = "debye_length"\ncolour = 1'))
    assert main(["check", str(path)]) == 2
    err = capsys.readouterr().err
    assert str(path) in err and "limit[0] (debye-long).colour" in err and "unknown key" in err
    path.write_text("[[limit]\n")
    assert main(["check", str(path)]) == 2
    assert "not valid TOML" in capsys.readouterr().err


def test_durations_accept_hours() -> None:
    # 1 h = 3600 s (SI brochure, common practice)
    assert parse_alarm_options({"max_shelve": "1 h"}, "e.toml").max_shelve == 3600.0
