"""Channel map: instrument keys and units to canonical quantities, uncertainties, unknown keys, a time column."""

from __future__ import annotations

import numpy as np
import pytest

from monitor.channels import ChannelMap, parse_channels
from monitor.errors import ConfigError
from pipeline_helpers import make_batch

EV_PER_K = 1.380649e-23 / 1.602176634e-19   # CODATA 2018, exact by the SI definitions


def test_probe_in_cm3_and_kelvin() -> None:
    cmap = parse_channels({"dens": {"quantity": "ne", "unit": "cm^-3", "uncertainty": "20%"},
                           "temp": {"quantity": "Te", "unit": "K", "uncertainty": 1000}}, "x.toml")
    b = make_batch([0.0, 0.1, 0.2], dens=[1e11, np.nan, 2e11], temp=[30000.0, 31000.0, np.nan], volts=[1, 2, np.nan])
    m = cmap.apply(b)
    np.testing.assert_allclose(m.values["ne"], [1e17, np.nan, 2e17])
    np.testing.assert_allclose(m.values["Te"], [30000 * EV_PER_K, 31000 * EV_PER_K, np.nan])
    np.testing.assert_allclose(m.sigma["ne"], [0.2e17, np.nan, 0.4e17])
    # a bare number is in the channel's own unit (K here)
    np.testing.assert_allclose(m.sigma["Te"], 1000 * EV_PER_K)
    assert m.unknown == {"volts": 2}


def test_defaults_pass_canonical_keys_and_batch_sigma_wins() -> None:
    b = make_batch([0.0, 1.0], ne=[1e17, 2e17], Te=[3.0, 3.5], sigma={"Te": [0.1, np.nan]})
    cmap = parse_channels({"Te": {"quantity": "Te", "uncertainty": "0.3eV"}}, None)
    m = cmap.apply(b)
    np.testing.assert_allclose(m.values["ne"], [1e17, 2e17])
    np.testing.assert_allclose(m.sigma["Te"], [0.1, 0.3])     # per-sample first, the map where it has none
    assert "ne" not in m.sigma


def test_two_keys_feeding_one_quantity_configured_one_first() -> None:
    cmap = parse_channels({"dens": {"quantity": "ne", "unit": "cm^-3"}}, None)
    b = make_batch([0, 1, 2], ne=[5e16, 6e16, np.nan], dens=[1e11, np.nan, np.nan])
    np.testing.assert_allclose(cmap.apply(b).values["ne"], [1e17, 6e16, np.nan])


def test_time_column_in_milliseconds() -> None:
    cmap = parse_channels({"time_ms": {"quantity": "t", "unit": "ms"}}, None)
    b = make_batch([100.0, 100.0, 100.0], time_ms=[0.0, 1.0, 2.5], ne=[1e17] * 3)
    np.testing.assert_allclose(cmap.apply(b).t, [0.0, 0.001, 0.0025])


def test_default_map_counts_unknown_keys_per_key() -> None:
    m = ChannelMap().apply(make_batch([0, 1, 2], ne=[1e17] * 3, Isat=[1, np.nan, 1], Vf=[2, 2, 2]))
    assert m.unknown == {"Isat": 2, "Vf": 3}


@pytest.mark.parametrize("spec, key", [
    ({"a": "ne"}, "channels.a"),
    ({"a": {"quantity": "t", "unit": "ms", "uncertainty": "1ms"}}, "channels.a.uncertainty"),
    ({"a": {"quantity": "ne", "uncertainty": "-5%"}}, "channels.a.uncertainty"),
    ({"a": {"quantity": "ne", "unit": 3}}, "channels.a.unit"),
])
def test_bad_channel_specs(spec: dict, key: str) -> None:
    with pytest.raises(ConfigError) as info:
        parse_channels(spec, "c.toml")
    assert info.value.key == key and "c.toml" in str(info.value)
