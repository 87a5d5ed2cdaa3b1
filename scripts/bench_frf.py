"""Benchmark: ``ModalPlant.frf`` (modal sum) against python-control's ``frequency_response``.

A seeded random plant of 100 modes (10 Hz to 5 kHz, damping 0.2 % to 2 %), 8 force actuators
and 8 sensors (mixed displacement, velocity and acceleration), 5000 frequencies that include
every natural frequency. Both sides compute the same 8 x 8 x 5000 response on the same grid and
are timed in the same run, alike, the way :mod:`timeit` times a statement: one untimed warm-up
call each, then interleaved rounds (the order alternating, so that machine load hits both
alike) in which each side runs a burst of back-to-back calls lasting at least ``BURST_S``
(one call for python-control, a hundred or so for the modal sum); a side's time is the best
per-call time of its bursts (median printed too). Every burst starts after a pause of
``SETTLE_S``, so that neither side runs against threads the other left busy: BLAS libraries
keep their worker threads spinning for a while after a call, and python-control's sweep runs in
slycot's own bundled OpenBLAS, whose spinning workers then compete with numpy's (seen here: a
1.2 ms product took 16 ms, call after call, for about 0.1 s after the sweep).

The first call of each burst, which starts from a quiet machine with cold caches, is also
reported on its own ("single calls"). BLAS threading is left as the environment sets it
(``OPENBLAS_NUM_THREADS``, ``OMP_NUM_THREADS``) and printed, with the engine ``plant.frf`` used
(:mod:`dampctl.model.modalbasis`; the numpy engine is timed too). The last line printed is the time
ratio of repeated calls (best against best) and the largest relative difference.

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

from dampctl.model.components import Actuator, Mode, Sensor
from dampctl.model.modalbasis import resolve_engine
from dampctl.model.plant import ModalPlant

N_MODES, N_IN, N_OUT, N_FREQ = 100, 8, 8, 5000
ROUNDS = 7
BURST_S = 0.2  # shortest burst (s), as timeit's autorange
SETTLE_S = 0.3  # pause (s) before every burst, longer than BLAS workers keep spinning


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


def calls_per_burst(func) -> int:
    """Calls of ``func()`` in a burst of at least BURST_S (1, 2, 5, 10, 20, 50, ...)."""
    for scale in (1, 10, 100, 1000, 10000):
        for base in (1, 2, 5):
            number = base * scale
            start = time.perf_counter()
            for _ in range(number):
                func()
            if time.perf_counter() - start >= BURST_S:
                return number
    return 50000


def burst(func, number: int) -> tuple[float, float, object]:
    """After a pause of SETTLE_S: time (s) of the first call and per call over ``number`` calls."""
    time.sleep(SETTLE_S)
    start = time.perf_counter()
    result = func()
    first = time.perf_counter() - start
    for _ in range(number - 1):
        func()
    return first, (time.perf_counter() - start) / number, result


def compare(sides: dict, rounds: int = ROUNDS) -> dict:
    """Per side: per-call times of its bursts, first-call times, last result, calls per burst.

    One warm-up call each (and the burst sizing), then ``rounds`` interleaved rounds of one
    burst per side, the order turning by one side each round.
    """
    names = list(sides)
    record = {name: {"per_call": [], "first": [], "result": sides[name]()} for name in names}
    for name in names:
        record[name]["number"] = calls_per_burst(sides[name])
    for k in range(rounds):
        for name in names[k % len(names) :] + names[: k % len(names)]:
            first, per_call, result = burst(sides[name], record[name]["number"])
            record[name]["first"].append(first)
            record[name]["per_call"].append(per_call)
            record[name]["result"] = result
    for entry in record.values():
        entry["per_call"] = np.array(entry["per_call"])
        entry["first"] = np.array(entry["first"])
    return record


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
    engine = resolve_engine("auto", plant.n_modes, freq_hz.size)

    record = compare(
        {
            "plant.frf": lambda: plant.frf(freq_hz, ins, outs),
            "plant.frf, numpy engine": lambda: plant.frf(freq_hz, ins, outs, engine="numpy"),
            "control.frequency_response": lambda: control.frequency_response(model, omega).complex,
        }
    )
    ours = record["plant.frf"]["result"]
    ref = np.asarray(record["control.frequency_response"]["result"]).reshape(ours.shape)
    diff = float(np.max(np.abs(ours - ref) / np.maximum(np.abs(ref), 1e-300)))
    ref_best = record["control.frequency_response"]["per_call"].min()
    ref_first = record["control.frequency_response"]["first"].min()
    print(f"plant: {N_MODES} modes, {N_IN} inputs, {N_OUT} outputs, {freq_hz.size} frequencies")
    print(f"threads: {blas_threads()}; {os.cpu_count()} CPUs; plant.frf engine: {engine}")
    print(f"{'':27s} {'repeated calls (per call)':>28s}  {'single calls':>12s}")
    for name, entry in record.items():
        best, median = entry["per_call"].min(), np.median(entry["per_call"])
        print(
            f"{name + ':':27s} best {best * 1e3:8.2f} ms, median {median * 1e3:8.2f} ms"
            f"  best {entry['first'].min() * 1e3:8.2f} ms  ({entry['number']} per burst)"
        )
    numpy_best = record["plant.frf, numpy engine"]["per_call"].min()
    first_best = record["plant.frf"]["first"].min()
    print(
        f"numpy engine: ratio {ref_best / numpy_best:.0f}x; single calls: "
        f"ratio {ref_first / first_best:.0f}x"
    )
    best = record["plant.frf"]["per_call"]
    ref_median = np.median(record["control.frequency_response"]["per_call"])
    print(
        f"ratio {ref_best / best.min():.0f}x (median {ref_median / np.median(best):.0f}x; "
        f"goal >= 200x), max relative difference {diff:.2e} (goal <= 1e-9)"
    )


if __name__ == "__main__":
    main()
