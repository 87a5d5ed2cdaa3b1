"""Benchmark: ``ModalPlant.frf`` (modal sum) against python-control's ``frequency_response``.

A seeded random plant of 100 modes (10 Hz to 5 kHz, damping 0.2 % to 2 %), 8 force actuators
and 8 sensors (mixed displacement, velocity and acceleration), 5000 frequencies that include
every natural frequency. Both sides compute the same 8 x 8 x 5000 response on the same grid and
are timed in the same run alike: one untimed warm-up call each, then interleaved rounds of one
timed call each (the order alternating between rounds, so that machine load hits both alike),
and each side reports its best and median time over the rounds. BLAS threading is left as the
environment sets it (``OPENBLAS_NUM_THREADS``, ``OMP_NUM_THREADS``) and printed. The last line
printed is the time ratio (best against best) and the largest relative difference.

Run: ``python scripts/bench_frf.py``
"""

from __future__ import annotations

import os
import sys
import time
from pathlib import Path

import control
import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))  # run from a checkout

from dampctl.components import Actuator, Mode, Sensor
from dampctl.plant import ModalPlant

N_MODES, N_IN, N_OUT, N_FREQ = 100, 8, 8, 5000
ROUNDS = 9


def random_plant(seed: int = 20261201) -> ModalPlant:
    """The seeded benchmark plant."""
    rng = np.random.default_rng(seed)
    freqs = np.sort(np.exp(rng.uniform(np.log(10.0), np.log(5000.0), N_MODES)))
    zetas = np.exp(rng.uniform(np.log(0.002), np.log(0.02), N_MODES))
    modes = [Mode(freq_hz=f, damping=z) for f, z in zip(freqs, zetas, strict=True)]
    sites = {f"s{k + 1}": rng.normal(size=N_MODES) for k in range(max(N_IN, N_OUT))}
    actuators = [Actuator(name=f"f{k + 1}", kind="force", site=f"s{k + 1}") for k in range(N_IN)]
    kinds = ("displacement", "velocity", "acceleration")
    sensors = [Sensor(name=f"y{k + 1}", kind=kinds[k % 3], site=f"s{k + 1}") for k in range(N_OUT)]
    return ModalPlant(modes=modes, sites=sites, actuators=actuators, sensors=sensors)


def timed(func) -> tuple[float, object]:
    """Wall time (s) of one call of ``func()`` and its result."""
    start = time.perf_counter()
    result = func()
    return time.perf_counter() - start, result


def compare_times(first, second, rounds: int = ROUNDS):
    """Times (s) of ``first()`` and ``second()`` over ``rounds`` interleaved rounds.

    One untimed warm-up call of each, then per round one timed call of each, the one that goes
    first alternating. Returns both arrays of times and the results of the last calls.
    """
    result_a, result_b = first(), second()
    times_a, times_b = [], []
    for k in range(rounds):
        if k % 2 == 0:
            t_a, result_a = timed(first)
            t_b, result_b = timed(second)
        else:
            t_b, result_b = timed(second)
            t_a, result_a = timed(first)
        times_a.append(t_a)
        times_b.append(t_b)
    return np.array(times_a), np.array(times_b), result_a, result_b


def blas_threads() -> str:
    """The BLAS/OpenMP thread settings of the environment, as printed."""
    names = ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS")
    return ", ".join(f"{n}={os.environ.get(n, 'unset')}" for n in names)


def main() -> None:
    """Run the benchmark and print the ratio and the difference (last line)."""
    plant = random_plant()
    ins = [a.name for a in plant.actuators]
    outs = [s.name for s in plant.sensors]
    grid = np.geomspace(1.0, 20000.0, N_FREQ - N_MODES)
    freq_hz = np.sort(np.concatenate([grid, plant.freqs_hz]))
    omega = 2.0 * np.pi * freq_hz
    model = plant.statespace(ins, outs)

    times_ours, times_ref, ours, ref = compare_times(
        lambda: plant.frf(freq_hz, ins, outs),
        lambda: control.frequency_response(model, omega).complex,
    )
    ref = np.asarray(ref).reshape(ours.shape)
    diff = float(np.max(np.abs(ours - ref) / np.maximum(np.abs(ref), 1e-300)))
    t_ours, t_ref = times_ours.min(), times_ref.min()
    rounds = times_ours.size
    print(f"plant: {N_MODES} modes, {N_IN} inputs, {N_OUT} outputs, {freq_hz.size} frequencies")
    print(f"threads: {blas_threads()}; {os.cpu_count()} CPUs")
    print(
        f"plant.frf:                  best {t_ours * 1e3:9.2f} ms, "
        f"median {np.median(times_ours) * 1e3:9.2f} ms ({rounds} rounds)"
    )
    print(
        f"control.frequency_response: best {t_ref * 1e3:9.2f} ms, "
        f"median {np.median(times_ref) * 1e3:9.2f} ms ({rounds} rounds)"
    )
    print(
        f"ratio {t_ref / t_ours:.0f}x (median {np.median(times_ref) / np.median(times_ours):.0f}x; "
        f"goal >= 200x), max relative difference {diff:.2e} (goal <= 1e-9)"
    )


if __name__ == "__main__":
    main()
