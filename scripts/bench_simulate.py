"""Benchmark: time simulation of a 1000-mode plant against python-control forced_response.

Run from the repository root: ``python scripts/bench_simulate.py [--modes 1000] [--samples
100000] [--short 5000]``. The plant has ``--modes`` modes from 10 Hz to 5 kHz (ζ = 0.5 %), a
force actuator with a collocated velocity sensor closed by velocity feedback with a roll-off,
sampled at 20 kHz (no loop delay besides the sample of computation, no roll-offs of the
hardware, so both sides simulate the same sampled loop).

* dampctl: ``simulate_move`` (a 1 µm step) open loop, and with the design (open and closed
  loop both, as ``dampctl simulate PLANT DESIGN`` runs them), for ``--samples`` samples;
  engines "numpy" (open loop as per-mode filters, closed loop stepped in numpy) and, when
  numba is installed, "compiled".
* python-control: ``sample_system`` (ZOH) of the plant's state space, the discrete controller,
  a one-sample delay, ``feedback``, then ``forced_response`` with the same command — for
  ``--short`` samples only, since it stores every state (2 × modes × samples doubles) and steps a
  dense transition matrix (4 × modes² multiplications per sample).

Both sides are timed in the same run on ``--short`` samples (one untimed warm-up call each,
then interleaved rounds, best kept; scripts/benchtiming.py); the last line prints both times,
their ratio and the largest difference of the output records. dampctl alone is then timed
on ``--samples``. Thread counts of the BLAS are printed: compare runs with
``OPENBLAS_NUM_THREADS=1 OMP_NUM_THREADS=1`` and without.
"""

from __future__ import annotations

import argparse
import os
import time

import control
import numpy as np
from benchtiming import compare_times  # scripts/ is on sys.path when run as a script

from dampctl.design import Branch, Design, Loop, Section
from dampctl.discrete.equivalents import discretize
from dampctl.discrete.simulate import simulate_move
from dampctl.discrete.timeloop import _compiled_kernel
from dampctl.model.components import Actuator, Mode, Output, Pair, Requirements, Sensor
from dampctl.model.plant import ModalPlant

RATE = 20e3
ROUNDS = 2


def make_plant(n_modes: int) -> ModalPlant:
    """Modes log-spaced 10 Hz – 5 kHz, ζ = 0.5 %, random (seeded) shapes at three sites."""
    rng = np.random.default_rng(0)
    freqs = np.geomspace(10.0, 5000.0, n_modes)
    modes = [Mode(freq_hz=f, damping=0.005) for f in freqs]
    sites = {name: rng.normal(size=n_modes) / np.sqrt(n_modes) for name in ("a", "b")}
    return ModalPlant(
        modes=modes,
        sites=sites,
        actuators=[Actuator("f", "force", site="a")],
        sensors=[Sensor("v", "velocity", site="a")],
        pairs=[Pair("p", "f", "v")],
        outputs=[Output("z", "displacement", site="b")],
        requirements=Requirements(sample_rate_hz=RATE),
        title=f"{n_modes}-mode benchmark plant",
    )


def make_design(plant: ModalPlant) -> Design:
    rolloff = Section((1.0,), (1 / (2 * np.pi * 2000.0), 1.0))
    return Design(
        law="dvf", plant_fingerprint=plant.fingerprint, actuators=("f",), sensors=("v",),
        target_modes=(1,),
        loops=(Loop("p", "f", "v", 2.0, branches=(Branch(gain=2.0, sections=(rolloff,)),)),),
    )


def python_control_run(plant: ModalPlant, design: Design, steps: int, force: float):
    """The same sampled loop with python-control: ZOH plant, delay, controller, feedback."""
    T = 1.0 / RATE
    P = control.sample_system(plant.statespace(["f"], ["v", "z"]), T, method="zoh")
    K = control.ss(*discretize(design, RATE).realisation_matrices(), T)
    delay = control.ss([[0.0]], [[1.0]], [[1.0]], [[0.0]], T)
    pick = control.ss([], [], [], [[1.0, 0.0]], T)  # feed back v only
    loop = control.feedback(P, delay * K * pick, sign=-1)
    u = np.full(steps, force)
    response = control.forced_response(loop, U=u)
    return np.asarray(response.outputs)[1]


def dampctl_run(plant, design, steps, engine):
    sim = simulate_move(plant, design, drive="f", output="z", distance_m=1e-6,
                        duration_s=(steps - 1) / RATE, engine=engine)
    return sim


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--modes", type=int, default=1000)
    parser.add_argument("--samples", type=int, default=100_000)
    parser.add_argument("--short", type=int, default=5000)
    args = parser.parse_args()
    threads = {k: os.environ.get(k, "unset") for k in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS")}
    print(f"threads: {threads}; load average {os.getloadavg()[0]:.2f}; numba "
          f"{'installed' if _compiled_kernel() is not None else 'missing'}")
    plant = make_plant(args.modes)
    design = make_design(plant)
    engines = ["numpy"] + (["compiled"] if _compiled_kernel() is not None else [])
    # dampctl alone on the full length
    for label, des in (("open loop", None), ("open + closed loop", design)):
        for engine in engines:
            start = time.perf_counter()
            sim = dampctl_run(plant, des, args.samples, engine)
            took = time.perf_counter() - start
            name = f"{label}, engine {engine}"
            print(f"dampctl {args.modes} modes × {sim.time_s.size} samples, {name}: "
                  f"{took:.2f} s ({took / sim.time_s.size * 1e6:.1f} µs per sample)")
    # both sides on the short record, the same sampled loop
    force = dampctl_run(plant, None, 10, "numpy").setup["static_input"]
    engine = engines[-1]

    def ours():
        return dampctl_run(plant, design, args.short, engine).result.output("z").values

    def theirs():
        return python_control_run(plant, design, args.short, force)

    t_ours, t_theirs, z_ours, z_theirs = compare_times(ours, theirs, ROUNDS)
    gap = float(np.max(np.abs(z_ours - z_theirs)) / np.max(np.abs(z_theirs)))
    print(f"{args.modes} modes, {args.short} samples, closed loop (dampctl runs open and "
          f"closed, engine {engine}); best of {ROUNDS}")
    print(f"dampctl: {t_ours:.2f} s; python-control: {t_theirs:.2f} s; ratio "
          f"python-control/dampctl {t_theirs / t_ours:.1f}x; largest output difference "
          f"{gap:.1e} of the peak")


if __name__ == "__main__":
    main()
