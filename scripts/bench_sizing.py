"""Benchmark: exhaustive sizing search for 3 pairs out of 16 on a 20-mode plant.

Problem (the same for both methods): a seeded 20-mode plant (a 4 x 5 grid of masses joined by
springs, 0.5 % modal damping) with 16 candidate collocated force/velocity pairs; for k = 3,
every one of the C(16, 3) = 560 sets is considered, each with direct velocity feedback
u_p = -gamma * kappa_p * v_p on its loops (kappa_p: the low-gain normalization of
dampctl.sizing.screening), gamma tuned per set to maximize the smallest closed-loop damping over
modes 1-6 (closed-loop poles matched to modes by assignment).

* reference: the plain way -- per set, a 25-point log line search of gamma over 1e-3..10, each
  point building ``control.feedback`` and calling ``control.damp`` (python-control);
* dampctl: ``dampctl.sizing.screening.search_exhaustive`` (batched eigenvalues, pilot-gain
  screening, tuning of the shortlist only).

Both are timed in the same run (an untimed warm-up of each, then interleaved rounds, the best
of each kept). The last line prints the time ratio reference/dampctl, dampctl's cost per eigenvalue
evaluation relative to a bare batched ``numpy.linalg.eigvals`` on matrices of the same size,
and whether dampctl chose the reference's best set with at least its damping.

Run: python scripts/bench_sizing.py
"""

from __future__ import annotations

import os

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")  # both methods single-threaded, fair

import time

import numpy as np

from dampctl.analysis.closedloop import match_modes, open_loop_poles
from dampctl.model.components import Actuator, Pair, Sensor
from dampctl.model.plant import ModalPlant
from dampctl.sizing.screening import GAIN_RANGE, LoopTemplate, SetEvaluator
from dampctl.sizing.setsearch import all_sets, search_exhaustive

TARGETS = (1, 2, 3, 4, 5, 6)
ROUNDS = 3


def bench_plant(seed: int = 7) -> ModalPlant:
    """Seeded 4 x 5 mass-spring grid, 20 modes, 16 candidate force/velocity pairs."""
    rng = np.random.default_rng(seed)
    nx, ny = 4, 5
    n = nx * ny
    M = np.diag(rng.uniform(0.5, 1.5, n))
    K = np.zeros((n, n))

    def spring(a, b, k):
        K[a, a] += k
        K[b, b] += k
        K[a, b] -= k
        K[b, a] -= k

    for i in range(nx):
        for j in range(ny):
            if i + 1 < nx:
                spring(i * ny + j, (i + 1) * ny + j, rng.uniform(0.5, 2.0) * 1e5)
            if j + 1 < ny:
                spring(i * ny + j, i * ny + j + 1, rng.uniform(0.5, 2.0) * 1e5)
    for a in rng.choice(n, 6, replace=False):
        K[a, a] += rng.uniform(0.2, 1.0) * 1e5
    dofs = [f"m{k + 1}" for k in range(n)]
    sites = sorted(int(s) for s in rng.choice(n, 16, replace=False))
    acts = [
        Actuator(name=f"f{k + 1}", kind="force", site=dofs[k], cost=float(rng.uniform(500, 1500)))
        for k in sites
    ]
    sens = [
        Sensor(name=f"v{k + 1}", kind="velocity", site=dofs[k], cost=float(rng.uniform(200, 600)))
        for k in sites
    ]
    pairs = [Pair(name=f"p{k + 1}", actuator=f"f{k + 1}", sensor=f"v{k + 1}") for k in sites]
    return ModalPlant.from_lumped(
        M, K, dofs, damping=0.005, actuators=acts, sensors=sens, pairs=pairs, title="bench grid"
    )


def unit_templates(plant: ModalPlant) -> list[LoopTemplate]:
    """Ideal velocity feedback, unit gain, no controller states."""
    empty = (np.zeros((0, 0)), np.zeros((0, 1)), np.zeros((1, 0)), np.ones((1, 1)))
    return [LoopTemplate(p.name, p.actuator, p.sensor, empty) for p in plant.pairs]


def reference(plant: ModalPlant, sets: np.ndarray, kappa: np.ndarray):
    """The plain way: python-control feedback + damp at 25 gains per set."""
    import control

    gains = np.logspace(np.log10(GAIN_RANGE[0]), np.log10(GAIN_RANGE[1]), 25)
    open_poles = open_loop_poles(plant.omegas, plant.dampings)
    targets = np.array(TARGETS) - 1
    names = [p.name for p in plant.pairs]
    best = []
    for members in sets:
        pairs = [plant.pair(names[p]) for p in members]
        G = plant.statespace([p.actuator for p in pairs], [p.sensor for p in pairs])
        scores = []
        for g in gains:
            closed = control.feedback(G, g * np.diag(kappa[members]))
            _wn, zeta, poles = control.damp(closed, doprint=False)
            matched = match_modes(open_poles, poles)
            value = float(matched.damping[targets].min())
            if not matched.stable:
                value = min(value, float(np.min(zeta)), 0.0)
            scores.append(value)
        j = int(np.argmax(scores))
        best.append((scores[j], gains[j]))
    return np.array(best)


def _bare_seconds(log: list[np.ndarray]) -> float:
    """Seconds of bare batched eigvals on the very matrices dampctl evaluated (same batches)."""
    tick = time.perf_counter()
    for mats in log:
        np.linalg.eigvals(mats)
    return time.perf_counter() - tick


def main() -> None:
    plant = bench_plant()
    templates = unit_templates(plant)
    # one untimed warm-up of each side, then rounds in which dampctl, bare eigvals and the
    # reference each run once (dampctl and the reference alternating which goes first), the
    # fastest of each kept, so that load from other processes on a shared machine hits all alike
    warm = SetEvaluator(plant, templates, TARGETS)
    sets = all_sets(warm, range(len(templates)), 3)
    search_exhaustive(warm, sets)
    reference(plant, sets[:5], warm.kappa)
    runs, bare_runs, ref_runs = [], [], []

    def run_dampctl() -> None:
        tick = time.perf_counter()
        evaluator = SetEvaluator(plant, templates, TARGETS)
        ranked = search_exhaustive(evaluator, all_sets(evaluator, range(len(templates)), 3))
        runs.append((time.perf_counter() - tick, evaluator, ranked))
        logged = SetEvaluator(plant, templates, TARGETS)
        logged.log = []
        search_exhaustive(logged, sets)
        bare_runs.append(_bare_seconds(logged.log) / sum(m.shape[0] for m in logged.log))

    def run_reference() -> None:
        tick = time.perf_counter()
        ref = reference(plant, sets, warm.kappa)
        ref_runs.append((time.perf_counter() - tick, ref))

    for k in range(ROUNDS):
        for step in (run_dampctl, run_reference) if k % 2 == 0 else (run_reference, run_dampctl):
            step()
    t_dampctl, evaluator, ranked = min(runs, key=lambda r: r[0])
    t_ref, ref = min(ref_runs, key=lambda r: r[0])
    bare = min(bare_runs)
    print(f"plant: {plant.n_modes} modes, {len(templates)} candidate pairs, {sets.shape[0]} sets")
    threads = os.environ.get("OPENBLAS_NUM_THREADS")
    print(f"threads: OPENBLAS_NUM_THREADS={threads}; best of {ROUNDS}")
    print(
        f"dampctl: {t_dampctl * 1e3:.1f} ms, {evaluator.evaluations} eigenvalue evaluations "
        f"({evaluator.eig_seconds / max(evaluator.seconds, 1e-12):.0%} of scoring time in eigvals)"
    )
    print(f"reference: {t_ref:.2f} s, {sets.shape[0] * 25} feedback+damp evaluations")
    per_eval = t_dampctl / evaluator.evaluations
    names = [p.name for p in plant.pairs]
    j = int(np.argmax(ref[:, 0]))
    ref_set = [names[p] for p in sets[j]]
    dc_set = [names[p] for p in ranked.sets[0]]
    damping = evaluator.closed_loop(ranked.sets[0], ranked.gamma[0])
    dc_exact = float(damping[np.array(TARGETS) - 1].min())
    print(
        f"reference best: {ref_set} damping {ref[j, 0]:.5f} at gamma {ref[j, 1]:.4g}; "
        f"dampctl best: {dc_set} damping {dc_exact:.5f} at gamma {ranked.gamma[0]:.4g}"
    )
    same = sorted(ref_set) == sorted(dc_set)
    at_least = dc_exact >= ref[j, 0] - 1e-12
    verdict = "yes" if same and at_least else ("better set" if at_least else "no")
    print(
        f"ratio reference/dampctl: {t_ref / t_dampctl:.1f}x; cost per evaluation: "
        f"{per_eval / bare:.2f}x bare batched eigvals ({bare * 1e6:.0f} us per {A_size(evaluator)} "
        f"matrix); same best set with at least its damping: {verdict}"
    )


def A_size(evaluator: SetEvaluator) -> str:  # noqa: N802
    n = evaluator.A.shape[0]
    return f"{n}x{n}"


if __name__ == "__main__":
    main()
