"""Benchmark: dampctl's vector fitting against scikit-rf's, and a whole ``fit_modes``.

Data: FRFs of a seeded plant of 12 modes (40 Hz to 900 Hz, damping 0.5 % to 2 %) at 8
accelerometers from one force, 4001 frequencies, 1 % complex noise. Both implementations fit
the same 8 responses with 16 complex pole pairs and a constant term, from the same starting
poles, with scikit-rf's weighting (each response by the square root of its norm), for the same
fixed number of pole-relocation iterations (no early stop on either side), then the residues.
They are timed in the same run (:func:`benchtiming.compare_times`: a warm-up each, then
interleaved rounds, best time kept) and the last line gives the time ratio and the largest
relative difference of the poles. Before that, the median wall time of a whole
``dampctl.fit_modes`` on the same data (stability chart, choice, polish, shapes, errors) is
printed. One BLAS thread unless the environment says otherwise (printed).

Run: ``python scripts/bench_vectorfit.py`` (needs scikit-rf, in the ``test`` extra).
"""

from __future__ import annotations

import os
import statistics
import sys
import time
import warnings
from pathlib import Path

# one BLAS thread unless told otherwise: on a small shared machine threaded BLAS on these
# tall, thin least-squares problems was up to 25x slower than one thread
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
os.environ.setdefault("OMP_NUM_THREADS", "1")

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))  # run from a checkout
sys.path.insert(0, str(Path(__file__).resolve().parent))

from benchtiming import compare_times

from dampctl.model.components import Actuator, Mode, Sensor
from dampctl.model.modalfit import fit_modes
from dampctl.model.plant import ModalPlant
from dampctl.model.vectorfit import vector_fit

ITERATIONS = 8
PAIRS = 16


def _data():
    rng = np.random.default_rng(5)
    n_modes, n_out = 12, 8
    freqs = np.sort(rng.uniform(40.0, 900.0, n_modes))
    modes = [Mode(f, z) for f, z in zip(freqs, rng.uniform(0.005, 0.02, n_modes), strict=True)]
    sites = {f"a{k}": rng.normal(size=n_modes) for k in range(n_out)}
    plant = ModalPlant(modes=modes, sites=sites, actuators=[Actuator("f", "force", site="a0")],
                       sensors=[Sensor(n, "acceleration", site=n) for n in sites])
    freq = np.linspace(20.0, 1000.0, 4001)
    h = plant.frf(freq, ["f"], list(sites))
    noise = (rng.normal(size=h.shape) + 1j * rng.normal(size=h.shape)) / np.sqrt(2)
    return freq, h * (1 + 0.01 * noise), list(sites)


def main() -> None:
    import skrf

    threads = {k: os.environ.get(k, "unset") for k in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS")}
    print(f"BLAS threads: {threads}")
    freq, h, names = _data()
    times = []
    for _ in range(3):
        start = time.perf_counter()
        fit = fit_modes(freq, h, output_kinds="acceleration", outputs=names, inputs=["f"],
                        driving_points=["a0/f"])
        times.append(time.perf_counter() - start)
    print(f"fit_modes, 8 channels x {freq.size} frequencies: median {statistics.median(times):.2f}"
          f" s over 3 runs; {fit.n_modes} modes, chart orders 1-{fit.chart.orders[-1].order}")

    data = h[:, 0, :]
    # scikit-rf fits the n x n responses of a network: 9 = 3 x 3, the ninth repeats the first
    responses = np.vstack([data, data[:1]])
    s_params = responses.T.reshape(freq.size, 3, 3)
    network = skrf.Network(frequency=skrf.Frequency.from_f(freq, unit="hz"), s=s_params)
    norm = np.mean(freq)
    s = 2j * np.pi * freq / norm
    weights = np.sqrt(np.linalg.norm(responses, axis=1))[:, None] * np.ones(responses.shape)
    start_poles = (-0.01 + 1j) * 2 * np.pi * np.linspace(freq[0], freq[-1], PAIRS) / norm

    def ours():
        return vector_fit(s, responses, weights, start_poles, inverse_square=False,
                          max_iterations=ITERATIONS, tolerance=0.0).poles * norm

    def theirs():
        reference = skrf.vectorFitting.VectorFitting(network)
        reference.max_iterations, reference.max_tol = ITERATIONS, 0.0
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            reference.vector_fit(n_poles_real=0, n_poles_cmplx=PAIRS, init_pole_spacing="lin",
                                 parameter_type="s", fit_constant=True, fit_proportional=False)
        return np.asarray(reference.poles)

    t_ours, t_theirs, p_ours, p_theirs = compare_times(ours, theirs, rounds=5)
    a, b = np.sort_complex(p_ours), np.sort_complex(p_theirs)
    diff = float(np.max(np.abs(a - b) / np.abs(b))) if a.size == b.size else float("nan")
    print(f"vector fitting, {ITERATIONS} iterations, {PAIRS} pole pairs, 9 responses: dampctl "
          f"{t_ours * 1e3:.0f} ms, scikit-rf {t_theirs * 1e3:.0f} ms")
    print(f"ratio scikit-rf/dampctl {t_theirs / t_ours:.2f}; largest relative pole difference "
          f"{diff:.1e}")


if __name__ == "__main__":
    main()
