"""Benchmark: closed-loop evaluation of a DVF gain grid, dampctl batch vs python-control.

Both compute the closed-loop poles of the same plant and controller for every gain of a grid,
with the delay and roll-off in the loop: dampctl stacks the closed-loop matrices and calls
``numpy.linalg.eigvals`` once (what the tuning does); python-control builds the loop with
``feedback`` and asks for ``poles()`` per gain. Both are timed in the same run: one untimed
warm-up call each, then interleaved rounds of one timed call each (the order alternating), best
time of each side kept. Also times one whole ``dvf.design`` search. The last line prints the
time ratio python-control / dampctl and the largest pole difference between the two.

Run: python scripts/bench_tuning.py
"""

from __future__ import annotations

import os
import time

import control
import numpy as np
from benchtiming import compare_times  # scripts/ is on sys.path when run as a script

from dampctl.analysis.closedloop import closed_loop_matrix, effective_controller
from dampctl.laws import dvf
from dampctl.testing import chain_plant

ROUNDS = 5


def main() -> None:
    """Run the benchmark; the last line is the ratio and the pole agreement."""
    plant = chain_plant([1.0] * 30, [1e5] * 30, damping=0.005)
    pairs = ["p1", "p10", "p20", "p30"]
    delay = 2e-4
    unit = dvf.design(plant, pairs, gain=1.0, delay_s=delay, roll_off_hz=300.0)
    mats = plant.statespace_matrices(unit.actuators, unit.sensors)
    Ac, Bc, Cc, Dc = effective_controller(plant, unit, delay_s=delay)
    gains = np.logspace(0, 3, 100)
    sys_plant = control.ss(*mats)

    def ours():
        stack = np.array([closed_loop_matrix(mats, (Ac, Bc * g, Cc, Dc * g)) for g in gains])
        return np.linalg.eigvals(stack)

    def theirs():
        poles = []
        for g in gains:
            controller = control.ss(Ac, Bc * g, Cc, Dc * g)
            poles.append(control.feedback(sys_plant, controller, sign=-1).poles())
        return poles

    ours_s, theirs_s, poles_ours, poles_theirs = compare_times(ours, theirs, ROUNDS)

    worst = 0.0
    for a, b in zip(poles_ours, poles_theirs, strict=True):
        a, b = np.sort_complex(a), np.sort_complex(np.asarray(b))
        worst = max(worst, float(np.max(np.abs(a - b) / np.maximum(np.abs(b), 1.0))))
    n = poles_ours.shape[1]

    start = time.perf_counter()
    design = dvf.design(plant, pairs, modes=[1, 2, 3, 4, 5], delay_s=delay)
    full = time.perf_counter() - start
    start = time.perf_counter()
    quick = dvf.design(plant, pairs, modes=[1, 2, 3, 4, 5], delay_s=delay, refine=False)
    fast = time.perf_counter() - start
    threads = ", ".join(
        f"{k}={os.environ.get(k, 'unset')}" for k in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS")
    )
    print(f"{gains.size} gains, closed loop of {n} states; threads: {threads}")
    print(
        f"dvf.design, 4 loops: {full * 1e3:.0f} ms ({design.info['evaluations']} solves, "
        f"min damping {design.info['min_damping']:.4f}); refine=False: {fast * 1e3:.0f} ms "
        f"({quick.info['evaluations']} solves, {quick.info['min_damping']:.4f})"
    )
    print(f"dampctl batched eigvals : {ours_s * 1e3:8.1f} ms (best of {ROUNDS})")
    print(f"python-control feedback : {theirs_s * 1e3:8.1f} ms (best of {ROUNDS})")
    print(
        f"ratio python-control/dampctl {theirs_s / ours_s:.2f}x; "
        f"largest relative pole difference {worst:.2e}"
    )


if __name__ == "__main__":
    main()
