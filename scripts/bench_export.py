"""Benchmark: sampled-loop verification of an export against python-control doing the same.

Run from the repository root: ``python scripts/bench_export.py``. Prints both times, their
ratio, and the largest distance between the two sets of closed-loop poles.
"""

from __future__ import annotations

import time

import control
import numpy as np

from dampctl.design import Branch, Design, Loop, Section
from dampctl.discrete import discretize
from dampctl.sampledloop import sampled_closed_loop, sampled_plant
from dampctl.testing import chain_plant


def main() -> None:
    n = 100
    plant = chain_plant([1.0] * n, [4e6] * n, damping=0.005)
    rolloff = Section((1.0,), (1 / (2 * np.pi * 5000.0), 1.0))
    design = Design(
        law="dvf",
        plant_fingerprint=plant.fingerprint,
        actuators=("f100",),
        sensors=("v100",),
        target_modes=tuple(range(1, 11)),
        loops=(
            Loop("p100", "f100", "v100", 50.0, branches=(Branch(gain=50.0, sections=(rolloff,)),)),
        ),
    )
    rate = 20e3
    T = 1 / rate
    ctrl = discretize(design, rate).realisation_matrices()

    t0 = time.perf_counter()
    ours = np.linalg.eigvals(sampled_closed_loop(sampled_plant(plant, design, rate), ctrl))
    t_ours = time.perf_counter() - t0

    t0 = time.perf_counter()
    P = control.sample_system(plant.statespace(["f100"], ["v100"]), T, method="zoh")
    delay = control.ss([[0.0]], [[1.0]], [[1.0]], [[0.0]], T)
    theirs = control.feedback(P, delay * control.ss(*ctrl, T), sign=-1).poles()
    t_theirs = time.perf_counter() - t0

    gap = max(np.min(np.abs(ours - p)) for p in theirs)
    print(
        f"dampctl sampled loop: {t_ours * 1e3:.1f} ms; python-control: {t_theirs * 1e3:.1f} ms;"
        f" ratio {t_theirs / t_ours:.2f}; largest pole distance {gap:.2e}"
    )


if __name__ == "__main__":
    main()
