"""Benchmark: sampled-loop verification of an export against python-control doing the same.

Run from the repository root: ``python scripts/bench_export.py``. Both are timed in the same
run: one untimed warm-up call each, then interleaved rounds of one timed call each, best time
of each side kept. The last line prints both times, their ratio, and the largest distance
between the two sets of closed-loop poles.
"""

from __future__ import annotations

import control
import numpy as np
from benchtiming import compare_times  # scripts/ is on sys.path when run as a script

from dampctl.design import Branch, Design, Loop, Section
from dampctl.discrete.equivalents import discretize
from dampctl.discrete.sampledloop import sampled_closed_loop, sampled_plant
from dampctl.testing import chain_plant

ROUNDS = 3


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

    def ours():
        return np.linalg.eigvals(sampled_closed_loop(sampled_plant(plant, design, rate), ctrl))

    def theirs():
        P = control.sample_system(plant.statespace(["f100"], ["v100"]), T, method="zoh")
        delay = control.ss([[0.0]], [[1.0]], [[1.0]], [[0.0]], T)
        return control.feedback(P, delay * control.ss(*ctrl, T), sign=-1).poles()

    t_ours, t_theirs, poles_ours, poles_theirs = compare_times(ours, theirs, ROUNDS)
    gap = max(np.min(np.abs(poles_ours - p)) for p in poles_theirs)
    print(f"{poles_ours.size} closed-loop poles, sampled at {rate:g} Hz; best of {ROUNDS}")
    print(
        f"dampctl sampled loop: {t_ours * 1e3:.1f} ms; python-control: {t_theirs * 1e3:.1f} ms;"
        f" ratio python-control/dampctl {t_theirs / t_ours:.2f}x; largest pole distance {gap:.2e}"
    )


if __name__ == "__main__":
    main()
