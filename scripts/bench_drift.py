"""Benchmark: frequency-drift robustness, dampctl (batched eigenvalues) vs python-control.

For the same drift cases, dampctl builds every closed-loop matrix with plain numpy and solves
all eigenvalue problems in one batched call; the python-control route builds each drifted
plant as a StateSpace, closes the loop with ``feedback`` and takes ``poles()``. Both give the
same largest real part (checked). Both are timed in the same run: one untimed warm-up call
each, then interleaved rounds of one timed call each, best time of each side kept. The last
line prints the ratio of wall times and the agreement. Run from the repository root:

    python scripts/bench_drift.py
"""

from __future__ import annotations

import control as ct
import numpy as np
from benchtiming import compare_times  # scripts/ is on sys.path when run as a script

from dampctl.analysis.loopmodel import loop_controller
from dampctl.analysis.robustness import drift_cases, drift_robustness, drifted_plant_matrices
from dampctl.design import Branch, Design, Loop
from dampctl.model.components import Actuator, Mode, Pair, Sensor
from dampctl.model.plant import ModalPlant

ROUNDS = 5


def main(n_modes: int = 40, n_pairs: int = 4, samples: int = 40) -> None:
    rng = np.random.default_rng(0)
    freqs = np.geomspace(10, 2000, n_modes)
    sites = {f"s{j}": rng.standard_normal(n_modes) for j in range(n_pairs)}
    plant = ModalPlant(
        modes=[Mode(f, 0.005) for f in freqs],
        sites=sites,
        actuators=[Actuator(f"a{j}", "force", site=f"s{j}") for j in range(n_pairs)],
        sensors=[Sensor(f"v{j}", "velocity", site=f"s{j}") for j in range(n_pairs)],
        pairs=[Pair(f"p{j}", f"a{j}", f"v{j}") for j in range(n_pairs)],
    )
    loops = [Loop(f"p{j}", f"a{j}", f"v{j}", 2.0, (Branch(gain=2.0),)) for j in range(n_pairs)]
    design = Design(
        law="dvf",
        plant_fingerprint=plant.fingerprint,
        actuators=tuple(lp.actuator for lp in loops),
        sensors=tuple(lp.sensor for lp in loops),
        target_modes=(1, 2, 3),
        loops=tuple(loops),
    )
    ctrl = loop_controller(plant, design, delay_s=1e-4, omega_ref=2 * np.pi * 500)
    cases = drift_cases(plant.n_modes, 0.05, samples=samples, seed=0, step_modes=4)
    K = ct.ss(*ctrl)

    def ours():
        return drift_robustness(plant, design, ctrl, (1, 2, 3), drift=0.05, samples=samples)

    def theirs():
        worst = -np.inf
        for f in cases:
            G = ct.ss(*drifted_plant_matrices(plant, design.actuators, design.sensors, f))
            poles = ct.feedback(G, K).poles()
            worst = max(worst, float(np.max(poles.real)))
        return worst

    t_ours, t_ct, result, worst = compare_times(ours, theirs, ROUNDS)
    gap = abs(worst - result.max_real_part) / abs(worst)
    if gap > 1e-6:
        raise SystemExit(f"largest real parts disagree: {result.max_real_part!r} vs {worst!r}")
    print(
        f"{len(cases)} drift cases, {2 * n_modes} plant states, {n_pairs} loops; best of "
        f"{ROUNDS}: dampctl {t_ours:.3f} s (with mode matching), python-control feedback+poles "
        f"{t_ct:.3f} s"
    )
    print(
        f"ratio python-control/dampctl {t_ct / t_ours:.2f}x; largest real part "
        f"{worst:.6g} 1/s, relative difference {gap:.1e}"
    )


if __name__ == "__main__":
    main()
