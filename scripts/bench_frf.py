"""Benchmark: ``ModalPlant.frf`` (modal sum) against python-control's ``frequency_response``.

A seeded random plant of 100 modes (10 Hz to 5 kHz, damping 0.2 % to 2 %), 8 force actuators
and 8 sensors (mixed displacement, velocity and acceleration), 5000 frequencies that include
every natural frequency. Both are timed in the same run, in interleaved rounds so that machine
load hits both alike: each round runs ``plant.frf`` three times (it is cheap, and its best time
is then a warm-cache time, as in a sweep) and python-control once; each side reports its best
time over the rounds. The last line printed is the time ratio and the largest relative
difference.

Run: ``python scripts/bench_frf.py``
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

import control
import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))  # run from a checkout

from dampctl.components import Actuator, Mode, Sensor
from dampctl.plant import ModalPlant

N_MODES, N_IN, N_OUT, N_FREQ = 100, 8, 8, 5000
REPEATS = 5


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


def best_times(first, second, repeats: int = REPEATS) -> tuple[float, float, object, object]:
    """Best wall times (s) of ``first()`` and ``second()`` over ``repeats`` interleaved rounds.

    A round runs ``first`` three times and ``second`` once; the results of the last runs are
    returned too.
    """
    best_a = best_b = np.inf
    result_a = result_b = None
    for _ in range(repeats):
        for _ in range(3):
            start = time.perf_counter()
            result_a = first()
            best_a = min(best_a, time.perf_counter() - start)
        start = time.perf_counter()
        result_b = second()
        best_b = min(best_b, time.perf_counter() - start)
    return best_a, best_b, result_a, result_b


def main() -> None:
    """Run the benchmark and print the ratio and the difference (last line)."""
    plant = random_plant()
    ins = [a.name for a in plant.actuators]
    outs = [s.name for s in plant.sensors]
    grid = np.geomspace(1.0, 20000.0, N_FREQ - N_MODES)
    freq_hz = np.sort(np.concatenate([grid, plant.freqs_hz]))
    omega = 2.0 * np.pi * freq_hz
    model = plant.statespace(ins, outs)

    t_ours, t_ref, ours, ref = best_times(
        lambda: plant.frf(freq_hz, ins, outs),
        lambda: control.frequency_response(model, omega).complex,
    )
    ref = np.asarray(ref).reshape(ours.shape)
    diff = float(np.max(np.abs(ours - ref) / np.maximum(np.abs(ref), 1e-300)))
    print(f"plant: {N_MODES} modes, {N_IN} inputs, {N_OUT} outputs, {freq_hz.size} frequencies")
    print(f"plant.frf:                    {t_ours * 1e3:9.2f} ms (best of {3 * REPEATS})")
    print(f"control.frequency_response:   {t_ref * 1e3:9.2f} ms (best of {REPEATS})")
    print(f"ratio {t_ref / t_ours:.0f}x, max relative difference {diff:.2e}")


if __name__ == "__main__":
    main()
