"""Fair timing shared by the benchmarks: warm-up, then interleaved rounds for both sides."""

from __future__ import annotations

import time

import numpy as np


def compare_times(first, second, rounds: int):
    """Best wall times (s) of ``first()`` and ``second()`` over interleaved rounds.

    One untimed warm-up call of each, then per round one timed call of each, the one that goes
    first alternating. Returns both best times and the results of the last calls.
    """
    result_a, result_b = first(), second()
    best_a = best_b = np.inf
    for k in range(rounds):
        for which in (0, 1) if k % 2 == 0 else (1, 0):
            start = time.perf_counter()
            if which == 0:
                result_a = first()
                best_a = min(best_a, time.perf_counter() - start)
            else:
                result_b = second()
                best_b = min(best_b, time.perf_counter() - start)
    return best_a, best_b, result_a, result_b
