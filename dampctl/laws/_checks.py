"""Checks shared by the collocated laws: pair look-up, collocation, target modes, clusters.

A pair is **collocated** when its actuator's generalized-force row (modal input row times
modal mass) and its sensor's modal output row are positively proportional: every modal residue
of the loop then has the same sign, poles and zeros alternate, and the ideal collocated laws are
stable for any positive gain (Preumont, *Vibration Control of Active Structures*, 3rd ed. 2011,
collocated control; from memory). This is the same test :func:`dampctl.model.survey.survey_plant`
uses.

Near-repeated clusters (:func:`dampctl.model.survey.find_clusters`): the k modes of a cluster can
all be damped only by pairs whose shape rows on the cluster have rank k (PBH test, Hautus 1969).
With fewer, the tuning objective of a cluster is its r-th best damping (r = the rank), so the search
does not chase a mode no loop can reach, and the design says which modes cannot all be damped.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from dampctl.errors import DesignRefused, UsageError
from dampctl.model.plant import ModalPlant, Pair
from dampctl.model.survey import cluster_rank, find_clusters, pair_rows, pair_visibility

__all__ = [
    "ModeGroups",
    "check_collocated",
    "mode_groups",
    "resolve_pairs",
    "target_indices",
]

#: visibility (survey.pair_visibility: shape values against the mode's own largest) below
#: which a pair does not see a mode
VISIBILITY_TOL = 1e-6


def resolve_pairs(plant: ModalPlant, pairs: Sequence[str], law: str) -> tuple[Pair, ...]:
    """Look up the named pairs.

    Parameters
    ----------
    plant : ModalPlant
        The plant.
    pairs : sequence of str
        Pair names (at least one, no repeats).
    law : str
        The law's name, for messages.

    Returns
    -------
    tuple of Pair
    """
    if isinstance(pairs, str):
        pairs = [pairs]
    names = list(pairs)
    if not names:
        raise UsageError(f"{law}: give at least one pair")
    if len(set(names)) != len(names):
        raise UsageError(f"{law}: a pair is repeated in {', '.join(names)}")
    found = tuple(plant.pair(name) for name in names)
    actuators = [p.actuator for p in found]
    sensors = [p.sensor for p in found]
    for what, items in (("actuator", actuators), ("sensor", sensors)):
        if len(set(items)) != len(items):
            raise UsageError(f"{law}: two pairs share one {what}; each loop needs its own")
    return found


def check_collocated(plant: ModalPlant, pair: Pair, law: str) -> None:
    """Raise :class:`DesignRefused` unless the pair is collocated (same place, same sense).

    Parameters
    ----------
    plant : ModalPlant
        The plant.
    pair : Pair
        The pair.
    law : str
        The law's name, for the message.
    """
    force_row = plant.input_row(pair.actuator) * plant.modal_masses
    sensor_row, _order = plant.output_row(pair.sensor)
    nb, nc = np.linalg.norm(force_row), np.linalg.norm(sensor_row)
    if nb == 0.0 or nc == 0.0:
        which = "actuator" if nb == 0.0 else "sensor"
        raise DesignRefused(
            f"pair {pair.name!r} cannot damp anything: its {which}'s mode-shape values are all "
            "zero (it sits at a node of every mode)",
            field=f"pairs.{pair.name}",
        )
    cosine = float(np.dot(force_row, sensor_row) / (nb * nc)) if nb > 0 and nc > 0 else 0.0
    if cosine > 1.0 - 1e-9:
        return
    if cosine < -1.0 + 1e-9:
        detail = (
            "its sensor measures in the opposite sense to the actuator (flip one of them in "
            "the plant file)"
        )
    else:
        detail = "its sensor does not act at the actuator's place and direction"
    raise DesignRefused(
        f"{law.upper()} needs a collocated pair, but pair {pair.name!r} is not collocated: "
        f"{detail}; "
        "collocated-law stability is not guaranteed there — use --law lqg "
        "(model-based) for non-collocated pairs",
        field=f"pairs.{pair.name}",
    )


def target_indices(plant: ModalPlant, modes: Sequence[int] | None) -> tuple[int, ...]:
    """0-based indices of the target modes (default: the plant's required modes, or all).

    Parameters
    ----------
    plant : ModalPlant
        The plant.
    modes : sequence of int or None
        1-based mode numbers.

    Returns
    -------
    tuple of int
        Sorted 0-based indices.
    """
    if modes is None or len(modes) == 0:
        modes = plant.requirements.modes or range(1, plant.n_modes + 1)
    out = sorted({int(m) for m in modes})
    for m in out:
        if not 1 <= m <= plant.n_modes:
            raise UsageError(
                f"mode {m} does not exist (the plant has {plant.n_modes} modes, numbered from 1)",
                field="modes",
            )
    return tuple(m - 1 for m in out)


@dataclass(frozen=True)
class ModeGroups:
    """How the target modes enter the tuning objective.

    Attributes
    ----------
    groups : tuple of (tuple of int, int)
        (0-based mode indices, r): the group's score is its r-th largest damping ratio. A
        well-separated mode is its own group with r = 1; a rank-deficient cluster has r = rank.
    unseen : tuple of int
        Target modes (1-based) no given pair sees (left out of the objective).
    shortfall : tuple of dict
        Clusters the pairs cannot fully damp: ``{"modes", "pairs_needed", "rank"}`` (1-based).
    warnings : tuple of str
        Plain-language findings.
    floor : ndarray, shape (n_modes,)
        Damping ratio no mode may fall below: half its open-loop damping for a mode outside
        the targets (a loop tuned for some modes must not undo the others), 0 for targets.
    """

    groups: tuple[tuple[tuple[int, ...], int], ...]
    unseen: tuple[int, ...]
    shortfall: tuple[dict, ...]
    warnings: tuple[str, ...]
    floor: np.ndarray

    def score(self, damping: np.ndarray) -> np.ndarray:
        """Objective of each row of closed-loop damping ratios (n_eval, n_modes).

        Returns the minimum over groups of each group's r-th largest damping (+1 when no group
        remains), or −inf where a mode falls below its :attr:`floor`.
        """
        damping = np.atleast_2d(damping)
        out = np.full(damping.shape[0], 1.0)
        for members, rank in self.groups:
            values = -np.sort(-damping[:, list(members)], axis=1)
            out = np.minimum(out, values[:, rank - 1])
        broken = np.any(damping < self.floor[None, :] - 1e-12, axis=1)
        return np.where(broken, -np.inf, out)

    @property
    def modes(self) -> tuple[int, ...]:
        """0-based indices of the modes the objective looks at."""
        return tuple(sorted(i for members, _ in self.groups for i in members))


def mode_groups(
    plant: ModalPlant, pairs: Sequence[Pair], targets: Sequence[int], *, cluster_tol: float = 0.02
) -> ModeGroups:
    """Group the target modes for the objective and find what the pairs cannot damp.

    Parameters
    ----------
    plant : ModalPlant
        The plant.
    pairs : sequence of Pair
        The loops' pairs.
    targets : sequence of int
        0-based target mode indices.
    cluster_tol : float, optional
        Relative frequency spacing of near-repeated modes.

    Returns
    -------
    ModeGroups
    """
    names = [p.name for p in pairs]
    b_rows, c_rows = pair_rows(plant, names)
    # scale-free: each mode's own term against the others' at its frequency (pole-zero spacing)
    seen = (pair_visibility(plant, names) >= VISIBILITY_TOL).any(axis=0)
    targets = [i for i in targets]
    unseen = tuple(i + 1 for i in targets if not seen[i])
    remaining = {i for i in targets if seen[i]}
    groups, shortfall, warnings = [], [], []
    if unseen:
        warnings.append(
            f"no given pair sees mode(s) {_listing(unseen)}: they cannot be damped with these "
            "pairs (add a pair where their shapes are large)"
        )
    for cluster in find_clusters(plant.freqs_hz, cluster_tol):
        members = [i for i in cluster if i in remaining]
        if len(members) < 2:
            continue
        rank = cluster_rank(b_rows, c_rows, cluster)
        remaining -= set(members)
        if rank >= len(cluster):
            groups.extend(((i,), 1) for i in members)
            continue
        modes = tuple(i + 1 for i in cluster)
        shortfall.append({"modes": list(modes), "pairs_needed": len(cluster), "rank": rank})
        warnings.append(
            f"modes {_listing(modes)} are near-repeated (within {cluster_tol:.0%}): damping them "
            f"all needs {len(cluster)} pairs whose shapes span them, but the {len(pairs)} "
            f"pair(s) given span only {rank}; modes {_listing(modes)} cannot all be damped "
            f"(at least {len(cluster) - rank} stays near its open-loop damping)"
        )
        usable = min(rank, len(members))
        if usable >= 1:
            groups.append((tuple(members), usable))
    groups.extend(((i,), 1) for i in sorted(remaining))
    groups.sort(key=lambda g: g[0][0])
    floor = 0.5 * plant.dampings
    floor[list(targets)] = 0.0
    return ModeGroups(
        groups=tuple(groups),
        unseen=unseen,
        shortfall=tuple(shortfall),
        warnings=tuple(warnings),
        floor=floor,
    )


def _listing(numbers) -> str:
    return ", ".join(str(n) for n in numbers)
