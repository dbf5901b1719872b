"""The names, units, kinds and plain meanings of every base and derived quantity (the contract)."""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["Quantity", "BASE", "DERIVED", "ALL", "lookup"]


@dataclass(frozen=True)
class Quantity:
    name: str
    unit: str          # SI unit as printed ("m^-3", "eV", "rad/s", "1")
    kind: str          # base, lengths, frequencies, speeds, collisions, dimensionless, densities
    meaning: str       # a few words for the operator


BASE: tuple[Quantity, ...] = (
    Quantity("ne", "m^-3", "base", "electron density"),
    Quantity("Te", "eV", "base", "electron temperature"),
    Quantity("Ti", "eV", "base", "ion temperature"),
    Quantity("B", "T", "base", "magnetic field"),
    Quantity("p0", "Pa", "base", "neutral pressure"),
)

DERIVED: tuple[Quantity, ...] = (
    Quantity("debye_length", "m", "lengths", "electron Debye length"),
    Quantity("debye_number", "1", "dimensionless", "electrons in a Debye sphere"),
    Quantity("debye_ratio", "1", "dimensionless", "device size over Debye length"),
    Quantity("electron_plasma_frequency", "rad/s", "frequencies", "electron plasma frequency (angular)"),
    Quantity("ion_plasma_frequency", "rad/s", "frequencies", "ion plasma frequency (angular)"),
    Quantity("electron_most_probable_speed", "m/s", "speeds", "Maxwellian most probable speed sqrt(2kT/m)"),
    Quantity("electron_mean_speed", "m/s", "speeds", "Maxwellian mean speed sqrt(8kT/(pi m))"),
    Quantity("electron_rms_speed", "m/s", "speeds", "Maxwellian rms speed sqrt(3kT/m)"),
    Quantity("electron_thermal_speed", "m/s", "speeds", "thermal speed sqrt(kT/m)"),
    Quantity("coulomb_logarithm", "1", "collisions", "electron-ion Coulomb logarithm"),
    Quantity("electron_ion_collision_frequency", "1/s", "collisions", "electron-ion collision rate"),
    Quantity("electron_neutral_collision_frequency", "1/s", "collisions", "electron-neutral collision rate"),
    Quantity("electron_mean_free_path", "m", "lengths", "electron mean free path"),
    Quantity("knudsen_number", "1", "dimensionless", "mean free path over device size"),
    Quantity("neutral_density", "m^-3", "densities", "neutral gas density"),
    Quantity("ionization_fraction", "1", "dimensionless", "ne / (ne + n0)"),
    Quantity("collectivity", "1", "dimensionless", "plasma frequency over collision rate"),
    Quantity("electron_cyclotron_frequency", "rad/s", "frequencies", "electron cyclotron frequency (angular)"),
    Quantity("ion_cyclotron_frequency", "rad/s", "frequencies", "ion cyclotron frequency (angular)"),
    Quantity("electron_gyroradius", "m", "lengths", "electron thermal gyroradius"),
    Quantity("ion_gyroradius", "m", "lengths", "ion thermal gyroradius"),
    Quantity("hall_parameter", "1", "dimensionless", "electron cyclotron frequency over collision rate"),
    Quantity("plasma_beta", "1", "dimensionless", "plasma pressure over magnetic pressure"),
    Quantity("cutoff_density", "m^-3", "densities", "critical density of the wave frequency"),
    Quantity("cutoff_ratio", "1", "dimensionless", "ne over cutoff density"),
)

ALL: dict[str, Quantity] = {q.name: q for q in BASE + DERIVED}


def lookup(name: str) -> Quantity:
    """The quantity called ``name``; KeyError naming the known ones otherwise."""
    try:
        return ALL[name]
    except KeyError:
        raise KeyError(f"unknown quantity {name!r}; known: {', '.join(ALL)}") from None
