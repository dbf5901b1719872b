"""Throughput of the derived set: ours (numpy, with uncertainties) beside PlasmaPy, a pure-Python loop and a numpy floor.

Run: python tests/bench/bench_physics.py [--quick]
Prints samples/s per batch size and the ratios; takes about a minute. A script, not a timed test.

    python tests/bench/bench_physics.py --baseline DIR [--rounds 5]

times derive() of this tree beside the checkout in DIR (e.g. `git archive <commit> | tar -x -C DIR`),
one subprocess each, alternating rounds, and prints this tree's time over the baseline's per batch
size (1.00 = as fast), plus the cost of the nonlinearity check when inputs carry wide (20 %) sigmas.
"""

from __future__ import annotations

import argparse
import importlib
import math
import subprocess
import sys
import time
import warnings
from pathlib import Path
from typing import Callable

import numpy as np

from monitor.model import Device
from monitor.physics import derive
from monitor.physics.constants import ELEMENTARY_CHARGE, EPSILON_0

derive_module = importlib.import_module("monitor.physics.derive")
validity = importlib.import_module("monitor.physics.validity")

BATCHES = (1, 100, 10_000, 1_000_000)
DEVICE = Device(length=0.3, wave_frequency=2.45e9)
K_FLOOR = EPSILON_0 / ELEMENTARY_CHARGE
LOOP_CAP = 5_000          # the pure-Python loop is timed on at most this many samples


def best(fn: Callable[[], object], budget: float = 0.4, max_runs: int = 200,
         clock: Callable[[], float] = time.perf_counter) -> float:
    """Best time of fn (by ``clock``) over repeated runs within about ``budget`` seconds (at least 2 runs)."""
    times: list[float] = []
    start = time.perf_counter()
    while len(times) < 2 or (time.perf_counter() - start < budget and len(times) < max_runs):
        t0 = clock()
        fn()
        times.append(clock() - t0)
    return min(times)


def make_inputs(n: int) -> tuple[dict[str, np.ndarray], dict[str, np.ndarray]]:
    rng = np.random.default_rng(n)
    x = {"ne": rng.uniform(1e15, 1e18, n), "Te": rng.uniform(0.5, 9.0, n), "Ti": rng.uniform(0.02, 0.3, n),
         "B": rng.uniform(0.01, 0.2, n), "p0": rng.uniform(0.1, 10.0, n)}
    return x, {k: 0.05 * v for k, v in x.items()}


def plasmapy_core(n: int) -> Callable[[], object]:
    """The five-quantity core (lambda_D, omega_pe, thermal speed, lnLambda, nu_ei) on astropy quantities."""
    import astropy.units as u
    from plasmapy.formulary import frequencies, lengths, speeds
    from plasmapy.formulary.collisions import coulomb
    from plasmapy.formulary.collisions import frequencies as cf

    x, _ = make_inputs(n)
    ne = x["ne"] * u.m**-3 if n > 1 else x["ne"][0] * u.m**-3
    te = x["Te"] * u.eV if n > 1 else x["Te"][0] * u.eV

    def run() -> object:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            lengths.Debye_length(te, ne)
            frequencies.plasma_frequency(ne, "e-")
            speeds.thermal_speed(te, "e-")
            lnl = coulomb.Coulomb_logarithm(te, ne, ("e-", "p+"))
            # its array-capable electron collision rate (MaxwellianCollisionFrequencies takes no arrays)
            return cf.fundamental_electron_collision_freq(te, ne, "p+", coulomb_log=lnl)
    return run


def ours_core(n: int) -> Callable[[], object]:
    """The same five quantities with our public functions, like for like with plasmapy_core (no uncertainties)."""
    from monitor.physics.collisions import coulomb_logarithm, electron_ion_collision_frequency
    from monitor.physics.frequencies import electron_plasma_frequency
    from monitor.physics.lengths import debye_length
    from monitor.physics.speeds import thermal_speed

    x, _ = make_inputs(n)
    ne, te = x["ne"], x["Te"]

    def run() -> object:
        debye_length(ne, te)
        electron_plasma_frequency(ne)
        thermal_speed(te)
        lnl = coulomb_logarithm(ne, te)
        return electron_ion_collision_frequency(ne, te, lnl)
    return run


def python_loop(n: int) -> tuple[Callable[[], object], int]:
    """The whole set with uncertainties, one sample at a time in pure Python (math module)."""
    m = min(n, LOOP_CAP)
    x, s = make_inputs(m)
    rows = [{k: float(v[i]) for k, v in x.items()} for i in range(m)]
    srows = [{k: float(v[i]) for k, v in s.items()} for i in range(m)]
    dc = validity.device_consts(DEVICE)

    def run() -> object:
        out = None
        for row, srow in zip(rows, srows):
            r = dict(row)
            validity.validate_scalar(r)
            out = derive_module._core(derive_module._SCALAR, r, dc, derive_module._squares(srow, r, dc, False))
        return out
    return run, m


SIDE_BATCHES = (1, 100, 1000, 10_000, 100_000)


def worker(wide: bool) -> None:
    """Print the best derive() time (s) per SIDE_BATCHES size, one line of numbers (for --baseline)."""
    out = []
    for n in SIDE_BATCHES:
        x, s = make_inputs(n)
        if wide:
            s = {k: 4.0 * v for k, v in s.items()}          # 20 %: the nonlinearity check runs
        derive(x, DEVICE, s)
        # CPU time of this thread: on a shared machine other processes' load does not count
        if n < 1000:
            out.append(best(lambda: [derive(x, DEVICE, s) for _ in range(20)], 0.3, 400, time.thread_time) / 20)
        else:
            out.append(best(lambda: derive(x, DEVICE, s), 0.3 if n < 100_000 else 1.0, 200, time.thread_time))
    print(" ".join(f"{t:.6e}" for t in out))


def side_by_side(baseline: str, rounds: int) -> None:
    """This tree's derive() time over the baseline's, alternating subprocesses; the best of each is kept."""
    import os

    here = str(Path(__file__).resolve().parents[2])
    best_of: dict[str, list[float]] = {}
    for _ in range(rounds):
        for label, root, wide in (("baseline", baseline, False), ("this tree", here, False),
                                  ("this tree, 20 % sigmas", here, True)):
            env = dict(os.environ, PYTHONPATH=root)
            out = subprocess.run([sys.executable, __file__, "--worker"] + (["--wide"] if wide else []),
                                 env=env, check=True, capture_output=True, text=True, cwd=root).stdout
            times = [float(v) for v in out.split()]
            best_of[label] = [min(a, b) for a, b in zip(best_of[label], times)] if label in best_of else times
    base = best_of["baseline"]
    print(f"derive() with 5 % sigmas (the normal path), best of {rounds} alternating rounds")
    print(f"{'batch':>8} {'baseline us':>12} {'this tree us':>13} {'ratio':>7} {'20 % sigmas us':>15} {'ratio':>7}")
    for i, n in enumerate(SIDE_BATCHES):
        ours, wide = best_of["this tree"][i], best_of["this tree, 20 % sigmas"][i]
        print(f"{n:>8} {base[i] * 1e6:>12.1f} {ours * 1e6:>13.1f} {ours / base[i]:>7.3f} {wide * 1e6:>15.1f} "
              f"{wide / base[i]:>7.3f}")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="skip the 1e6 batch")
    parser.add_argument("--baseline", metavar="DIR", help="time derive() beside the checkout in DIR")
    parser.add_argument("--rounds", type=int, default=5)
    parser.add_argument("--worker", action="store_true", help=argparse.SUPPRESS)
    parser.add_argument("--wide", action="store_true", help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.worker:
        worker(args.wide)
        return
    if args.baseline:
        side_by_side(args.baseline, args.rounds)
        return
    batches = BATCHES[:-1] if args.quick else BATCHES
    # first, before the big batches fill this process's memory
    script = Path(sys.executable).with_name("regime")
    runs = []
    for _ in range(5):
        t0 = time.perf_counter()
        subprocess.run([str(script), "calc", "ne=5e16m-3", "Te=3eV±10%", "L=0.3m", "f=2.45GHz", "B=0.05T",
                        "p0=2Pa"], check=True, capture_output=True)
        runs.append(time.perf_counter() - t0)
    print(f"regime calc whole process: best {min(runs):.3f} s, median {sorted(runs)[2]:.3f} s over 5 runs")

    t_import = time.perf_counter()
    import plasmapy  # noqa: F401  (imported here so its cost is reported, not hidden in a batch)
    t_import = time.perf_counter() - t_import
    print(f"plasmapy import: {t_import:.2f} s")
    n_whole = len(derive(*make_inputs(4)[:1], DEVICE).values)
    n_core = len(derive({k: v for k, v in make_inputs(4)[0].items() if k in ("ne", "Te")}, Device()).values)
    print(f"whole set: {n_whole} quantities + uncertainties; ne+Te set (contains the five-quantity core): {n_core}")
    header = (f"{'batch':>9} {'whole set':>12} {'ne+Te set':>12} {'PlasmaPy 5':>12} {'py loop':>12} "
              f"{'floor':>12} {'ours 5':>12}   {'5/PP':>7} {'whole/PP':>9} {'ne+Te/PP':>9} {'per-q/PP':>9} {'whole/loop':>10} {'per-q/floor':>11}")
    print("throughput in samples/s (sets of quantities per second)")
    print(header)
    for n in batches:
        x, s = make_inputs(n)
        core_x = {k: x[k] for k in ("ne", "Te")}
        core_s = {k: s[k] for k in ("ne", "Te")}
        budget = 2.0 if n == 1_000_000 else 0.4
        t_whole = best(lambda: derive(x, DEVICE, s), budget)
        t_core = best(lambda: derive(core_x, Device(), core_s), budget)
        ne, te = x["ne"], x["Te"]
        t_floor = best(lambda: np.sqrt(K_FLOOR * te / ne), budget)
        t_ours5 = best(ours_core(n), budget)
        t_pp = best(plasmapy_core(n), budget=0.0 if n == 1_000_000 else 0.5, max_runs=2 if n == 1_000_000 else 50)
        loop, m = python_loop(n)
        t_loop = best(loop, budget=0.0, max_runs=2) / m * n
        rate = lambda t: n / t  # noqa: E731
        per_q = t_whole / n_whole
        print(f"{n:>9} {rate(t_whole):>12.3g} {rate(t_core):>12.3g} {rate(t_pp):>12.3g} {rate(t_loop):>12.3g} "
              f"{rate(t_floor):>12.3g} {rate(t_ours5):>12.3g}   {t_pp / t_ours5:>7.1f} {t_pp / t_whole:>9.1f} {t_pp / t_core:>9.1f} {t_pp / 5 / per_q:>9.1f} "
              f"{t_loop / t_whole:>10.1f} "
              f"{per_q / t_floor:>11.2f}")
        if n == 1:
            print(f"{'':>9} batch 1: whole set {t_whole * 1e6:.1f} us, ne+Te set {t_core * 1e6:.1f} us, "
                  f"PlasmaPy five {t_pp * 1e3:.2f} ms")
    print("ours 5 / 5/PP: our functions on exactly PlasmaPy's five quantities, no uncertainties on either side")
    print("(like for like); whole/PP: our whole set with uncertainties vs PlasmaPy's five; ne+Te/PP: our ne+Te set (12 quantities")
    print("with uncertainties, the five among them) vs PlasmaPy's five; per-q/PP: time per quantity, PlasmaPy")
    print("(five-set time / 5) over ours (whole-set time / quantities); per-q/floor: our time per quantity")
    print("over the fused Debye-length expression's time; the Python loop is timed on at most "
          f"{LOOP_CAP} samples")

if __name__ == "__main__":
    main()
