"""Benchmark: ``dampctl plant fe`` on generated shell-like plate models up to 200 000 DOFs.

Run from the repository root: ``python scripts/bench_fe.py [--dofs 25000,50000,100000,200000]
[--modes 50] [--runs 1]``. The model is the clamped aluminium plate of flat-shell Q4 elements
of ``scripts/shellmodel.py`` (5 DOFs per node), written as scipy sparse ``.npz`` files. Each
size is timed as users run it: the whole command ``dampctl plant fe --mass M.npz --stiffness
K.npz --site ... --modes N -o plant.toml`` in a subprocess (median of ``--runs``), with its
peak resident memory (``ru_maxrss`` of the child). Then, on a model small enough for both,
dampctl's shift-invert Lanczos (scipy ``eigsh`` with a SuperLU factorization) is timed
against the general-purpose way, the dense ``scipy.linalg.eigh`` of the full matrices, in the
same run (best of 3 each), with the largest relative difference of the frequencies. The last
lines give how the time grows with DOFs (the exponent of a log-log fit). The BLAS thread
count is printed: run with ``OPENBLAS_NUM_THREADS=1 OMP_NUM_THREADS=1`` to compare with one.
"""

from __future__ import annotations

import argparse
import math
import os
import resource
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import scipy.sparse as sp
from shellmodel import shell_plate  # scripts/ is on sys.path when run as a script

from dampctl.model.fe_matrices import fe_model
from dampctl.model.fe_modes import solve_modes


def _grid(dofs: int) -> tuple[int, int]:
    """nx, ny of the plate (aspect 1 : 0.8) with about ``dofs`` DOFs (5 nx (ny + 1))."""
    nx = max(2, round(math.sqrt(dofs / 5 / 0.8)))
    ny = max(1, round(dofs / 5 / nx) - 1)
    return nx, ny


def _command(folder: Path, n_dofs: int, modes: int) -> tuple[float, float]:
    """Wall time (s) and peak memory (MB) of one ``dampctl plant fe`` run."""
    tip = n_dofs - 2  # deflection w of the last node (a free corner): [u, v, w, βx, βy], 1-based
    argv = [sys.executable, "-m", "dampctl", "plant", "fe", "--mass", str(folder / "M.npz"),
            "--stiffness", str(folder / "K.npz"), "--site", f"corner={tip}", "--modes",
            str(modes), "-o", str(folder / "plant.toml"), "--force", "--quiet"]
    start = time.perf_counter()
    subprocess.run(argv, check=True, stdout=subprocess.DEVNULL)
    seconds = time.perf_counter() - start
    # the largest child so far (kB on Linux): sizes run smallest first, so it is this one's
    peak = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss
    return seconds, peak / 1024.0


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--dofs", default="25000,50000,100000,200000")
    parser.add_argument("--modes", type=int, default=50)
    parser.add_argument("--runs", type=int, default=1)
    parser.add_argument("--dense-dofs", type=int, default=3000)
    args = parser.parse_args()
    threads = {k: os.environ.get(k, "default") for k in ("OPENBLAS_NUM_THREADS",
                                                          "OMP_NUM_THREADS")}
    print(f"threads: {threads}; load average {os.getloadavg()[0]:.2f}")
    sizes, times = [], []
    for target in (int(x) for x in args.dofs.split(",")):
        nx, ny = _grid(target)
        M, K = shell_plate(nx, ny)
        with tempfile.TemporaryDirectory() as tmp:
            folder = Path(tmp)
            sp.save_npz(folder / "M.npz", M)
            sp.save_npz(folder / "K.npz", K)
            runs = [_command(folder, M.shape[0], args.modes) for _ in range(args.runs)]
        seconds = statistics.median(r[0] for r in runs)
        peak = max(r[1] for r in runs)
        sizes.append(M.shape[0])
        times.append(seconds)
        print(f"{M.shape[0]:>7} DOFs ({K.nnz} stiffness entries), {args.modes} modes: "
              f"{seconds:.2f} s (median of {args.runs}), peak memory {peak:.0f} MB")
    if len(sizes) > 1:
        slope = np.polyfit(np.log(sizes), np.log(times), 1)[0]
        print(f"time grows as DOFs^{slope:.2f} from {sizes[0]} to {sizes[-1]} DOFs")
    nx, ny = _grid(args.dense_dofs)
    model = fe_model(*shell_plate(nx, ny))
    best = {}
    for solver in ("lanczos", "dense"):
        spent = []
        for _ in range(3):
            start = time.perf_counter()
            found = solve_modes(model, n_modes=args.modes, solver=solver)
            spent.append(time.perf_counter() - start)
        best[solver] = (min(spent), found.freqs_hz)
    gap = np.max(np.abs(best["lanczos"][1] / best["dense"][1] - 1.0))
    print(f"{model.n_dofs} DOFs, {args.modes} modes: Lanczos {best['lanczos'][0]:.3f} s, dense "
          f"scipy eigh {best['dense'][0]:.3f} s (best of 3); ratio dense/Lanczos "
          f"{best['dense'][0] / best['lanczos'][0]:.1f}x; largest relative frequency "
          f"difference {gap:.1e}")


if __name__ == "__main__":
    main()
