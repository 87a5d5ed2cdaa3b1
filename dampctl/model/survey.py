"""Plant survey: what the candidate pairs can see, near-repeated mode clusters, dominant modes.

This is what ``dampctl check`` prints. Measures used:

* **Participation** of pair p in mode i: its share of the mode's Hankel singular value.
  For a lightly damped mode in the balanced modal form the HSV of pair p is approximately
  γ_ip = |b_ip| |c̃_ip| / (4 ζ_i ω_i) (Gawronski, *Dynamics and Control of Structures: A Modal
  Approach*, 1998), where c̃ is the sensor row on the balanced states (c/ω for a
  displacement-like sensor, c for velocity, ω c for acceleration). The share is
  γ_ip / Σ_q γ_iq, the sum running over the pairs of the same physical kind (same actuator
  kind and sensor kind, e.g. all force/velocity pairs), so the shares of one mode sum to 1 over
  the pairs of each kind; HSVs of pairs of different units are not compared. Damping is
  floored at 1e-6 for undamped modes.
* **Visibility**: a mode is seen by a pair when the loop can move its pole: the mode's own
  term of the pair's response, r_i/ω_i² (r = b c, the modal residue), against the other modes'
  terms at its frequency, Σ r_j/(ω_j² − ω_i²), is the relative spacing of the pole and the
  loop zero beside it, and it must be at least ``visibility_tol`` (default 1e-3). It compares
  the mode with what it takes to damp it, not with the pair's strongest mode, and it does not
  depend on where the mode lies in frequency: a 100 kHz mode of a plant that starts at 0.1 Hz
  is judged like the first one. A mode seen by no pair cannot be damped by any of them.
* **Clusters**: modes whose natural frequencies lie within ``cluster_tol`` (relative, default
  2 %) of a neighbour, chained; a chain wider than ``cluster_tol`` (many modes, each near the
  next) is cut where a mode lies more than ``cluster_tol`` above the first mode of the cluster
  being built, so no cluster spans more than ``cluster_tol``. Damping the k modes of a cluster
  independently needs at least k pairs whose shape vectors on the cluster span it (PBH rank
  test; Hautus 1969): the rank of the actuator rows and of the sensor rows restricted to the
  cluster, with tolerance 1e-6 relative.
* **Dominant modes** of a performance output: each mode's share of the output's mean-square
  response under the plant's disturbances (unit white forces at the actuators when there are
  none), from the single-mode approximation σ_i² ≈ (c_i ω_i^order b_i)² S(f_i) / (8 ζ_i ω_i³)
  (one-sided PSD in N²/Hz). Modes with a share ≥ ``dominant_share`` (default 10 %) are listed.
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass

import numpy as np

from dampctl.model.plant import ModalPlant

__all__ = [
    "Cluster",
    "PairSurvey",
    "PlantSurvey",
    "cluster_rank",
    "find_clusters",
    "pair_rows",
    "pair_visibility",
    "survey_plant",
]

_DAMPING_FLOOR = 1e-6


@dataclass(frozen=True)
class PairSurvey:
    """What one candidate pair can do.

    Attributes
    ----------
    pair : str
        Pair name.
    collocated : bool
        True when sensor and actuator act at the same place and direction (dual), so the
        pair's modal residues all have the same sign.
    description : str
        Actuator and sensor kinds, e.g. ``force/velocity``.
    participation : ndarray, shape (n_modes,)
        Share of each mode's Hankel singular value (0..1, sums to 1 over the pairs of the
        same kind).
    hsv : ndarray, shape (n_modes,)
        Approximate Hankel singular value γ_ip of the pair alone, per mode.
    """

    pair: str
    collocated: bool
    description: str
    participation: np.ndarray
    hsv: np.ndarray


@dataclass(frozen=True)
class Cluster:
    """A group of near-repeated modes.

    Attributes
    ----------
    modes : tuple of int
        Mode numbers (1-based).
    pairs_needed : int
        Number of independent pairs needed to damp them independently (the cluster size).
    rank : int
        Rank of all candidate pairs' shape rows on the cluster (min of actuator and sensor
        rank); damping them all independently is impossible when rank < pairs_needed.
    """

    modes: tuple[int, ...]
    pairs_needed: int
    rank: int


@dataclass(frozen=True)
class PlantSurvey:
    """Result of :func:`survey_plant`.

    Attributes
    ----------
    pairs : tuple of PairSurvey
        One entry per candidate pair.
    unseen_modes : tuple of int
        Modes (1-based) that no pair sees.
    clusters : tuple of Cluster
        Near-repeated mode clusters.
    dominant_modes : dict of str to list of (int, float)
        For each performance output, (mode, share) of the modes dominating its motion.
    warnings : tuple of str
        Plain-language findings.
    """

    pairs: tuple[PairSurvey, ...]
    unseen_modes: tuple[int, ...]
    clusters: tuple[Cluster, ...]
    dominant_modes: dict
    warnings: tuple[str, ...]


def find_clusters(freqs_hz: np.ndarray, cluster_tol: float = 0.02) -> list[list[int]]:
    """Groups (0-based indices) of modes within ``cluster_tol`` relative frequency, chained.

    Parameters
    ----------
    freqs_hz : array_like
        Natural frequencies (Hz).
    cluster_tol : float, optional
        Relative spacing below which two neighbouring modes belong to one cluster.

    Returns
    -------
    list of list of int
        Clusters of two or more modes, each sorted by frequency.
    """
    freqs = np.asarray(freqs_hz, dtype=float)
    order = np.argsort(freqs)
    chains, current = [], [int(order[0])] if freqs.size else []
    for a, b in itertools.pairwise(order):
        if (freqs[b] - freqs[a]) <= cluster_tol * freqs[a]:
            current.append(int(b))
        else:
            chains.append(current)
            current = [int(b)]
    chains.append(current)
    clusters: list[list[int]] = []
    for chain in chains:
        # a chain wider than the tolerance is cut where a mode lies beyond the tolerance from
        # the first mode of the cluster being built
        start = 0
        for k in range(1, len(chain) + 1):
            if k == len(chain) or freqs[chain[k]] - freqs[chain[start]] > (
                cluster_tol * freqs[chain[start]]
            ):
                if k - start > 1:
                    clusters.append(chain[start:k])
                start = k
    return clusters


def pair_visibility(plant: ModalPlant, pairs: list[str]) -> np.ndarray:
    """How much of each mode a pair sees: the mode's own term against the rest, at its frequency.

    Parameters
    ----------
    plant : ModalPlant
        The plant.
    pairs : list of str
        Pair names.

    Returns
    -------
    ndarray, shape (n_pairs, n_modes)
        min(1, |r_i/ω_i²| / |Σ_{j≠i} r_j/(ω_j² − ω_i²)|) with r = b c the modal residue of the
        pair (input row per unit modal mass times the sensor's shape row): the relative
        spacing (ω_i² − z_i²)/ω_i² of the mode's pole and the loop zero next to it. A loop
        can move a mode's pole only as far as that zero (for a collocated pair the largest
        damping it can add is about a quarter of this spacing: A. Preumont, *Vibration Control
        of Active Structures*, 3rd ed. 2011, from memory), so this is what the mode needs to
        be damped, measured on the mode itself: the other modes enter only through the zero,
        never as a yardstick. Terms of modes at the same frequency (a repeated cluster) are
        left out of the sum. 1 when nothing else responds there.
    """
    b_rows, _ = pair_rows(plant, pairs)
    raw = np.array([plant.output_row(plant.pair(name).sensor)[0] for name in pairs])
    residue = b_rows * raw.reshape(b_rows.shape)
    w2 = plant.omegas**2
    gap = w2[None, :] - w2[:, None]  # [i, j] = ω_j² − ω_i²
    same = np.abs(gap) <= 1e-9 * np.maximum(w2[:, None], 1e-300)
    with np.errstate(divide="ignore", invalid="ignore"):
        weights = np.where(same, 0.0, 1.0 / np.where(same, 1.0, gap))  # 1/(ω_j² − ω_i²)
    background = np.abs(residue @ weights.T)  # [p, i] = |Σ_j r_pj / (ω_j² − ω_i²)|
    own = np.abs(residue) / np.maximum(w2, 1e-300)
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = np.where(background > 0, own / np.where(background > 0, background, 1.0),
                         np.where(own > 0, 1.0, 0.0))
    return np.minimum(ratio, 1.0)


def pair_rows(plant: ModalPlant, pairs: list[str]) -> tuple[np.ndarray, np.ndarray]:
    """Actuator rows b and balanced sensor rows c̃ of the given pairs.

    Parameters
    ----------
    plant : ModalPlant
        The plant.
    pairs : list of str
        Pair names.

    Returns
    -------
    b_rows, c_rows : ndarray, shape (n_pairs, n_modes)
        Modal input rows (per unit input, divided by modal mass) and sensor rows on the
        balanced states (c/ω displacement-like, c velocity, ω c acceleration).
    """
    b_rows, c_rows = [], []
    w = plant.omegas
    for name in pairs:
        pair = plant.pair(name)
        b_rows.append(plant.input_row(pair.actuator))
        row, order = plant.output_row(pair.sensor)
        c_rows.append(row * w ** (order - 1))
    n = plant.n_modes
    return np.array(b_rows).reshape(len(pairs), n), np.array(c_rows).reshape(len(pairs), n)


def cluster_rank(b_rows: np.ndarray, c_rows: np.ndarray, modes: list[int]) -> int:
    """min(rank of actuator rows, rank of sensor rows) on a cluster's modes.

    Rows are normalized before the SVD; singular values below 1e-6 of the largest count as
    zero.

    Parameters
    ----------
    b_rows, c_rows : ndarray, shape (n_pairs, n_modes)
        Actuator and sensor rows, as from :func:`pair_rows`.
    modes : list of int
        The cluster's modes (0-based indices).

    Returns
    -------
    int
        The rank (0 when there are no pairs).
    """
    ranks = []
    for rows in (b_rows, c_rows):
        sub = rows[:, modes] if rows.size else np.zeros((0, len(modes)))
        if sub.size == 0:
            ranks.append(0)
            continue
        sub = sub / np.maximum(np.linalg.norm(sub, axis=1, keepdims=True), 1e-300)
        s = np.linalg.svd(sub, compute_uv=False)
        ranks.append(int(np.sum(s > 1e-6 * max(s[0], 1e-300))))
    return min(ranks)


def survey_plant(
    plant: ModalPlant,
    *,
    cluster_tol: float = 0.02,
    visibility_tol: float = 1e-3,
    dominant_share: float = 0.1,
) -> PlantSurvey:
    """Survey a plant's candidate pairs, clusters and output-dominant modes.

    Parameters
    ----------
    plant : ModalPlant
        The plant.
    cluster_tol : float, optional
        Relative frequency spacing defining near-repeated modes.
    visibility_tol : float, optional
        Relative HSV below which a pair does not see a mode.
    dominant_share : float, optional
        Share of an output's mean-square motion above which a mode is listed as dominant.

    Returns
    -------
    PlantSurvey
    """
    names = [p.name for p in plant.pairs]
    zeta = np.maximum(plant.dampings, _DAMPING_FLOOR)
    w = plant.omegas
    b_rows, c_rows = pair_rows(plant, names)
    hsv = np.abs(b_rows) * np.abs(c_rows) / (4.0 * zeta * w)
    kinds = []
    for name in names:
        pair = plant.pair(name)
        kinds.append(f"{plant.actuator(pair.actuator).kind}/{plant.sensor(pair.sensor).kind}")
    shares = np.zeros_like(hsv)
    for kind in set(kinds):
        group = [k for k, other in enumerate(kinds) if other == kind]
        totals = hsv[group].sum(axis=0)
        shares[group] = np.divide(
            hsv[group], totals, out=np.zeros_like(hsv[group]), where=totals > 0
        )
    surveys = []
    for k, name in enumerate(names):
        pair = plant.pair(name)
        raw_row = plant.output_row(pair.sensor)[0]
        surveys.append(
            PairSurvey(
                pair=name,
                collocated=_collocated(b_rows[k] * plant.modal_masses, raw_row),
                description=kinds[k],
                participation=shares[k],
                hsv=hsv[k],
            )
        )
    warnings = []
    if names:
        seen = pair_visibility(plant, names) >= visibility_tol
        unseen = tuple(int(i + 1) for i in np.flatnonzero(~seen.any(axis=0)))
    else:
        unseen = tuple(range(1, plant.n_modes + 1))
        warnings.append("the plant has no candidate pairs ([[pairs]]): nothing can be damped")
    if unseen and names:
        warnings.append(
            f"no pair sees mode(s) {_list(unseen)}: no loop on these pairs can damp "
            "them (add a pair where their shapes are large)"
        )
    clusters = []
    for group in find_clusters(plant.freqs_hz, cluster_tol):
        rank = cluster_rank(b_rows, c_rows, group) if names else 0
        modes = tuple(sorted(i + 1 for i in group))
        clusters.append(Cluster(modes=modes, pairs_needed=len(group), rank=rank))
        spread = plant.freqs_hz[group]
        text = (
            f"modes {_list(modes)} are near-repeated ({spread.min():.4g}–{spread.max():.4g} Hz, "
            f"within {cluster_tol:.0%}): damping them independently needs at least "
            f"{len(group)} pairs whose shapes span them"
        )
        if rank < len(group):
            text += f"; all candidate pairs together span only {rank}"
        warnings.append(text)
    for survey in surveys:
        if not survey.collocated:
            warnings.append(
                f"pair {survey.pair} is not collocated: DVF/IFF/PPF stability is not "
                "guaranteed on it (use LQG, or check margins)"
            )
    dominant = _dominant_modes(plant, zeta, dominant_share)
    return PlantSurvey(
        pairs=tuple(surveys),
        unseen_modes=unseen,
        clusters=tuple(clusters),
        dominant_modes=dominant,
        warnings=tuple(warnings),
    )


def _collocated(b_scaled: np.ndarray, c_row: np.ndarray) -> bool:
    nb, nc = np.linalg.norm(b_scaled), np.linalg.norm(c_row)
    if nb == 0 or nc == 0:
        return False
    return bool(np.dot(b_scaled, c_row) / (nb * nc) > 1.0 - 1e-9)


def _dominant_modes(plant: ModalPlant, zeta: np.ndarray, share_min: float) -> dict:
    w = plant.omegas
    if plant.disturbances:
        sources = [(plant.input_row(d.name), d.psd_at(plant.freqs_hz)) for d in plant.disturbances]
    else:
        sources = [(plant.input_row(a.name), np.ones(plant.n_modes)) for a in plant.actuators]
    out = {}
    for output in plant.outputs:
        row, order = plant.output_row(output.name)
        variance = np.zeros(plant.n_modes)
        for b, psd in sources:
            variance += (row * w**order * b) ** 2 * psd / (8.0 * zeta * w**3)
        total = variance.sum()
        if total <= 0:
            out[output.name] = []
            continue
        share = variance / total
        ranked = [int(i) for i in np.argsort(-share) if share[i] >= share_min]
        out[output.name] = [(i + 1, float(share[i])) for i in ranked]
    return out


def _list(numbers) -> str:
    return ", ".join(str(n) for n in numbers)
