"""Searches over sets of candidate loops: every set (with screening) or greedy with swaps.

Both work on a :class:`~dampctl.sizing.screening.SetEvaluator` and return
:class:`~dampctl.sizing.screening.TunedSets`, best first. Sets never share an actuator or a sensor
between two loops.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from dampctl.errors import UsageError
from dampctl.sizing.screening import SetEvaluator, TunedSets

__all__ = ["all_sets", "search_exhaustive", "search_greedy"]


def _disjoint(evaluator: SetEvaluator, members: Sequence[int]) -> bool:
    """True when no two loops of the set share an actuator or a sensor."""
    acts = [evaluator.templates[p].actuator for p in members]
    sens = [evaluator.templates[p].sensor for p in members]
    return len(set(acts)) == len(acts) and len(set(sens)) == len(sens)


def all_sets(evaluator: SetEvaluator, candidates: Sequence[int], k: int) -> np.ndarray:
    """Every k-subset of the candidates whose loops share no actuator or sensor.

    Parameters
    ----------
    evaluator : SetEvaluator
        Supplies the loops' hardware.
    candidates : sequence of int
        Candidate indices.
    k : int
        Set size.

    Returns
    -------
    ndarray of int, shape (n_sets, k)
        The sets, each sorted, in lexicographic order.
    """
    import itertools

    rows = [c for c in itertools.combinations(sorted(candidates), k) if _disjoint(evaluator, c)]
    return np.array(rows, dtype=int).reshape(len(rows), k)


def _tie_key(score: np.ndarray) -> np.ndarray:
    """Scores (damping ratios) rounded to 1e-9 for ranking: sets a symmetric plant makes equal
    keep their lexicographic order instead of the order the last bits of LAPACK give them."""
    return np.round(np.asarray(score, dtype=float), 9)


def _ranked(parts: list[TunedSets]) -> TunedSets:
    sets = np.concatenate([p.sets for p in parts])
    gamma = np.concatenate([p.gamma for p in parts])
    score = np.concatenate([p.score for p in parts])
    _, first = np.unique(np.sort(sets, axis=1), axis=0, return_index=True)
    sets, gamma, score = sets[first], gamma[first], score[first]
    order = np.lexsort((np.arange(score.size), -_tie_key(score)))
    return TunedSets(sets=np.sort(sets[order], axis=1), gamma=gamma[order], score=score[order])


def search_exhaustive(
    evaluator: SetEvaluator,
    sets: np.ndarray,
    *,
    shortlist: int = 10,
    pilots: int = 6,
    progress=None,
    chunk: int = 256,
) -> TunedSets:
    """Best sets among ``sets`` by the tuned criterion, screening before tuning.

    Every set is considered. With few sets, each is tuned (:meth:`SetEvaluator.tune`).
    Otherwise, in three stages:

    1. *pilot gain*: the ``pilots`` sets with the best low-gain estimate (smallest target
       damping slope) are tuned over the full range; the geometric mean of their best γ is the
       pilot gain γ_p;
    2. *screen*: every set is evaluated exactly (one eigenvalue problem each) at γ_p;
    3. *tune*: the ``shortlist`` best screened sets, and the pilots, are tuned around γ_p.
       If the winner's γ lies more than a factor 2 from γ_p, stage 2 is repeated at that γ
       and new entrants are tuned too.

    Parameters
    ----------
    evaluator : SetEvaluator
        The batched evaluator.
    sets : ndarray of int, shape (n_sets, k)
        The sets to search.
    shortlist, pilots : int, optional
        Stage sizes.
    progress : Progress, optional
        Advanced by one step per evaluated set in stage 2 (or per tuned set).
    chunk : int, optional
        Sets per batched eigenvalue call in stage 2 (bounds memory).

    Returns
    -------
    TunedSets
        The tuned sets, best first (only tuned sets are listed).
    """
    sets = np.atleast_2d(np.asarray(sets, dtype=int))
    if sets.shape[0] <= shortlist + pilots:
        out = [evaluator.tune(sets[i : i + chunk]) for i in range(0, sets.shape[0], chunk)]
        if progress is not None:
            progress.advance(sets.shape[0])
        return _ranked(out)
    proxy = evaluator.low_gain_damping(sets, 1.0)[:, evaluator.targets].min(axis=1)
    pilot_idx = np.argsort(-_tie_key(proxy), kind="stable")[:pilots]
    pilot = evaluator.tune(sets[pilot_idx], points=7, rounds=5)
    gamma_p = float(np.exp(np.mean(np.log(pilot.gamma))))
    parts = [pilot]
    tuned = {tuple(s) for s in pilot.sets.tolist()}
    for _ in range(2):
        screen = np.concatenate(
            [
                evaluator.score(part, np.full((part.shape[0], 1), gamma_p))[:, 0]
                for part in (sets[i : i + chunk] for i in range(0, sets.shape[0], chunk))
            ]
        )
        if progress is not None:
            progress.advance(sets.shape[0])
        order = np.argsort(-_tie_key(screen), kind="stable")
        new = [i for i in order[:shortlist] if tuple(sets[i]) not in tuned]
        if new:
            part = evaluator.tune(
                sets[new], center=gamma_p, span_decades=2.0, points=5, rounds=5
            )
            parts.append(part)
            tuned.update(tuple(s) for s in part.sets.tolist())
        ranked = _ranked(parts)
        best_gamma = float(ranked.gamma[0])
        if abs(np.log(best_gamma / gamma_p)) <= np.log(2.0):
            break
        gamma_p = best_gamma
    return _ranked(parts)


def search_greedy(
    evaluator: SetEvaluator,
    candidates: Sequence[int],
    k: int,
    *,
    start: Sequence[int] = (),
    max_swaps: int = 20,
    progress=None,
) -> TunedSets:
    """Greedy forward selection to k loops, then pairwise-swap refinement.

    From ``start`` (a set of k − 1 loops, or empty) each remaining candidate is added in turn
    and the tuned best kept; until k loops are chosen. Then every exchange of one member for
    one non-member is tuned and the best improving exchange taken, until none improves
    (at most ``max_swaps`` exchanges).

    Parameters
    ----------
    evaluator : SetEvaluator
        The batched evaluator.
    candidates : sequence of int
        Candidate indices.
    k : int
        Set size.
    start : sequence of int, optional
        Loops to start from (for example the best set of size k − 1).
    max_swaps : int, optional
        Limit on accepted exchanges.
    progress : Progress, optional
        Advanced by one step per tuned set.

    Returns
    -------
    TunedSets
        Every tuned k-set, best first.
    """
    pool = sorted(set(candidates))
    current = [int(p) for p in start]
    parts: list[TunedSets] = []
    while len(current) < k:
        trial = [
            [*current, c]
            for c in pool
            if c not in current and _disjoint(evaluator, [*current, c])
        ]
        if not trial:
            break
        tuned = evaluator.tune(np.array(trial, dtype=int))
        if progress is not None:
            progress.advance(len(trial))
        best = int(np.argmax(tuned.score))
        current = [int(x) for x in tuned.sets[best]]
        if len(current) == k:
            parts.append(tuned)
    if len(current) < k:
        raise UsageError(f"only {len(current)} candidate pairs can be combined, fewer than {k}")
    if not parts:
        parts.append(evaluator.tune(np.array([current], dtype=int)))
    best_score = float(_ranked(parts).score[0])
    for _ in range(max_swaps):
        trial = []
        for out in current:
            for c in pool:
                if c in current:
                    continue
                members = sorted([x for x in current if x != out] + [c])
                if _disjoint(evaluator, members):
                    trial.append(members)
        if not trial:
            break
        tuned = evaluator.tune(np.array(trial, dtype=int))
        if progress is not None:
            progress.advance(len(trial))
        parts.append(tuned)
        j = int(np.argmax(tuned.score))
        if tuned.score[j] <= best_score + 1e-9:
            break
        best_score = float(tuned.score[j])
        current = [int(x) for x in tuned.sets[j]]
    return _ranked(parts)
