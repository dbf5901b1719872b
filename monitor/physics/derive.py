"""One entry point that derives every regime quantity the given inputs allow, with uncertainties."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Mapping

import numpy as np
from numpy.typing import ArrayLike

from monitor.model import Device

__all__ = ["Derived", "derive"]


@dataclass(frozen=True, eq=False)
class Derived:
    """Derived quantities for N samples.

    ``values`` and ``sigma``: quantity name -> float64 array (N). ``invalid``:
    reason -> bool mask (N) of samples whose inputs are physically
    meaningless (their derived values are NaN). ``warnings``: code -> bool mask
    of samples outside a formula's validity (values kept).
    """

    values: dict[str, np.ndarray]
    sigma: dict[str, np.ndarray]
    invalid: dict[str, np.ndarray] = field(default_factory=dict)
    warnings: dict[str, np.ndarray] = field(default_factory=dict)

    @property
    def valid(self) -> np.ndarray:
        n = len(next(iter(self.values.values()))) if self.values else 0
        ok = np.ones(n, dtype=bool)
        for mask in self.invalid.values():
            ok &= ~mask
        return ok


def derive(
    inputs: Mapping[str, ArrayLike],
    device: Device,
    sigma: Mapping[str, ArrayLike] | None = None,
) -> Derived:
    """Derive every quantity of ``monitor.quantities.DERIVED`` that ``inputs``
    (canonical keys ne, Te, Ti, B, p0; canonical units) and ``device`` allow.

    Placeholder until the physics core lands: Debye length only.
    """
    ne = np.asarray(inputs["ne"], dtype=np.float64)
    te = np.asarray(inputs["Te"], dtype=np.float64)
    lam = np.sqrt(8.8541878188e-12 * te / (ne * 1.602176634e-19))
    return Derived(values={"debye_length": lam}, sigma={})
