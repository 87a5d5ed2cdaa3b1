"""Piezoelectric shunts: a resistor (R) or a resistor and an inductor (RL) across a strut.

Law
    A piezoelectric strut (a plant strut with ``capacitance_f`` C and ``coupling_k`` k; its
    ``stiffness_n_per_m`` is the short-circuit stiffness and the modes are those with its
    electrodes short-circuited) is closed on a passive network. Part of the mode's strain energy
    becomes electrical and is dissipated in the resistor; an inductor makes the network a
    second resonator tuned to the mode, like an electrical tuned-mass damper. Modelled exactly
    (:mod:`dampctl.analysis.passive`), after N. W. Hagood & A. von Flotow, "Damping of
    structural vibrations with piezoelectric materials and passive electrical networks",
    J. Sound Vib. 146(2), 243–268, 1991 (from memory).

Generalized coupling
    K_i² = (ω_oc,i² − ω_i²)/ω_i², from the mode's short-circuit frequency ω_i (the plant's) and
    open-circuit frequency ω_oc,i (the strut stiffened to k_s/(1 − k²)), computed exactly on
    the modal model for every target mode and strut (``info.coupling``). The achievable
    damping grows with K_i: it is the figure of merit of a strut for a mode.

Rule (the start), per shunt on its mode i
    On the single mode with the strut's capacitance seen at ω_i — the blocked capacitance
    C_ε = C(1 − k²) plus the quasi-static contribution of the other modes,
    C_eff = C_ε + Σ_{l≠i} θ_l²/(k_l − m_l ω_i²) — and K² = θ_i²/(k_i C_eff), Den Hartog's
    fixed-point method applied to the shunted mode gives (derived here, and checked against
    brute-force optima in the tests; r = R C_eff ω_i, δ = ω_e/ω_i with ω_e = 1/√(L C_eff)):

    * R:  r = 1/√(1 + K²/2); one fixed point, at ω_i √(1 + K²/2), of height 2/K² times the
      static response (an equivalent damping ratio K²/4);
    * RL: δ = √(1 + K²) (Hagood & von Flotow's tuning); r = K √(3 / (2 (1 + K²)(1 + K²/2)))
      (the mean of the two values that put a peak on each fixed point, as Den Hartog did);
      fixed points of height √2 / (K √(1 + K²)).

Refinement
    Each shunt's R (and L) are then refined on the full plant for the smallest response peak
    of its own mode at the outputs (:mod:`dampctl.laws._passive`), as for tuned-mass dampers;
    ``refine=False`` keeps the rule.

Inductance
    At low frequency the optimal L is large (henries to thousands of henries): above about 1 H
    (common practice) a wound inductor is impractically large and a synthetic inductor (an
    op-amp gyrator) is used, which needs power and is no longer strictly passive; the design
    says so.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np
from scipy.optimize import linear_sum_assignment

from dampctl.analysis.passive import piezo_constants
from dampctl.design import Design
from dampctl.errors import DesignRefused, UsageError
from dampctl.laws._passive import PeakObjective, mode_numbers, passive_design, refine_parts
from dampctl.model.passive import Shunt
from dampctl.model.plant import ModalPlant

__all__ = [
    "INDUCTANCE_CAUTION_H",
    "design",
    "generalized_coupling",
    "r_shunt_rule",
    "rl_shunt_rule",
]

LAW = "shunt"
#: inductance above which a wound inductor is impractical (common practice)
INDUCTANCE_CAUTION_H = 1.0


def r_shunt_rule(coupling: float) -> tuple[float, float]:
    """Resistive shunt on one mode: the optimal r = R C ω and the fixed-point height.

    Parameters
    ----------
    coupling : float
        Generalized coupling K of the mode (> 0).

    Returns
    -------
    r : float
        R C ω_i = 1/√(1 + K²/2) (C the capacitance seen, ω_i the short-circuit frequency).
    peak : float
        Largest response over the static response, 2/K².
    """
    k2 = float(coupling) ** 2
    return 1.0 / math.sqrt(1.0 + k2 / 2.0), 2.0 / k2


def rl_shunt_rule(coupling: float) -> tuple[float, float, float]:
    """Resistive-inductive shunt on one mode: tuning ratio, r = R C ω, fixed-point height.

    Parameters
    ----------
    coupling : float
        Generalized coupling K of the mode (> 0).

    Returns
    -------
    delta : float
        ω_e/ω_i = √(1 + K²), with ω_e = 1/√(L C).
    r : float
        R C ω_i = K √(3 / (2 (1 + K²)(1 + K²/2))).
    peak : float
        Height of the two fixed points over the static response, √2 / (K √(1 + K²)).
    """
    k = float(coupling)
    k2 = k * k
    delta = math.sqrt(1.0 + k2)
    r = k * math.sqrt(3.0 / (2.0 * (1.0 + k2) * (1.0 + k2 / 2.0)))
    return delta, r, math.sqrt(2.0) / (k * delta)


def generalized_coupling(plant: ModalPlant, actuator: str) -> np.ndarray:
    """Generalized coupling K_i of every mode with one piezoelectric strut (exact, modal).

    Parameters
    ----------
    plant : ModalPlant
        The plant (modes with the strut short-circuited).
    actuator : str
        The strut (with ``capacitance_f`` and ``coupling_k``).

    Returns
    -------
    ndarray, shape (n_modes,)
        K_i = √((ω_oc,i² − ω_i²)/ω_i²), the open-circuit frequencies ω_oc from the modal
        stiffness with the strut stiffened by κ k_s (κ = k²/(1 − k²)), matched to the modes
        by assignment.
    """
    strut = plant.actuator(actuator)
    kappa, _, _ = piezo_constants(strut)
    a, b = strut.between
    r = (np.asarray(plant.sites[b]) - np.asarray(plant.sites[a])) / np.sqrt(plant.modal_masses)
    w = plant.omegas
    stiff = np.diag(w**2) + kappa * strut.stiffness_n_per_m * np.outer(r, r)
    w_oc2 = np.maximum(np.linalg.eigvalsh(stiff), 0.0)
    cost = np.abs(np.log(np.maximum(w_oc2[None, :], 1e-300) / w[:, None] ** 2))
    rows, cols = linear_sum_assignment(cost)
    out = np.zeros(plant.n_modes)
    out[rows] = np.sqrt(np.maximum(w_oc2[cols] / w[rows] ** 2 - 1.0, 0.0))
    return out


def design(
    plant: ModalPlant,
    pairs: Sequence[str],
    *,
    modes: Sequence[int] | None = None,
    kind: str = "RL",
    refine: bool = True,
) -> Design:
    """Design passive shunts on piezoelectric struts, one per pair, each tuned to a mode.

    Parameters
    ----------
    plant : ModalPlant
        The plant.
    pairs : sequence of str
        Pairs whose actuators are piezoelectric struts; each strut gets one shunt.
    modes : sequence of int, optional
        Target modes (1-based); default the plant's required modes. Each shunt is tuned to the
        target mode its strut couples to best (every target mode gets one while struts last).
    kind : {"RL", "R"}, optional
        Network: resistor and inductor in series (default), or resistor alone.
    refine : bool, optional
        Refine on the full plant for the smallest output peak (default True).

    Returns
    -------
    Design
        Law ``shunt``; ``info.shunts`` lists ``pair``, ``kind``, ``resistance_ohm``,
        ``inductance_h`` (RL), ``mode``; ``info.coupling`` the generalized coupling of each
        target mode with each strut.
    """
    if kind not in ("R", "RL"):
        raise UsageError(f"shunt kind must be R or RL, got {kind!r}", field="kind")
    targets = mode_numbers(plant, modes, LAW)
    names = [pairs] if isinstance(pairs, str) else list(pairs)
    if not names:
        raise UsageError("shunt: give at least one pair with a piezoelectric strut")
    if len(set(names)) != len(names):
        raise UsageError(f"shunt: a pair is repeated in {', '.join(names)}")
    struts = []
    for name in names:
        pair = plant.pair(name)
        actuator = plant.actuator(pair.actuator)
        if not actuator.piezo:
            raise DesignRefused(
                f"pair {name}: actuator {actuator.name!r} is not a piezoelectric strut (a strut "
                "with capacitance_f and coupling_k in the plant file)"
            )
        struts.append(actuator.name)
    if len(set(struts)) != len(struts):
        raise UsageError("shunt: two pairs share one strut; each strut takes one shunt")
    coupling = np.array([generalized_coupling(plant, s) for s in struts])  # (n_struts, n_modes)
    assigned = _assign(coupling[:, [m - 1 for m in targets]], targets)
    warnings = []
    for j, m in enumerate(assigned):
        if coupling[j, m - 1] <= 0:
            raise DesignRefused(
                f"pair {names[j]}: strut {struts[j]} does not couple to mode {m} (its extension "
                "does not change in that mode)"
            )
    missed = [m for m in targets if m not in assigned]
    if missed:
        warnings.append(
            f"mode(s) {', '.join(map(str, missed))} get no shunt of their own (one shunt per "
            "strut, tuned to one mode): give more struts, or accept what the others give"
        )
    shunts, rules = [], []
    for j, (name, strut, m) in enumerate(zip(names, struts, assigned, strict=True)):
        shunt, rule = _rule(plant, name, strut, m, kind)
        shunts.append(shunt)
        rules.append({"pair": name, "mode": m, **rule})
        if coupling[j, m - 1] < 0.05:
            warnings.append(
                f"pair {name}: generalized coupling {coupling[j, m - 1]:.3g} on mode {m} is "
                "small: a shunt adds an equivalent damping of only about K²/4 (R) or K/(2√2) (RL)"
            )
    objective = PeakObjective(plant, shunts, targets)
    rule_ratio = objective.ratio(shunts)
    refined_ratio = rule_ratio
    if refine:
        shunts, rule_ratio, refined_ratio = refine_parts(
            objective,
            shunts,
            targets,
            lambda s: [v for v in (s.resistance_ohm, s.inductance_h) if v is not None],
            lambda s, v: Shunt(s.pair, s.actuator, s.kind, v[0], v[1] if len(v) > 1 else None,
                               s.mode),
            span=0.5,
        )
    for s in shunts:
        if s.inductance_h is not None and s.inductance_h > INDUCTANCE_CAUTION_H:
            warnings.append(
                f"pair {s.pair}: inductance {s.inductance_h:.4g} H is impractically large for a "
                f"wound inductor (above about {INDUCTANCE_CAUTION_H:g} H, common practice): it "
                "needs a synthetic inductor (an op-amp gyrator circuit), which needs power and "
                "is then no longer strictly passive"
            )
    tuning = (
        f"{kind} shunt rule (Hagood & von Flotow's model; Den Hartog's fixed points) on each "
        "shunt's mode with the capacitance it sees there"
    )
    if refine:
        tuning += (
            ", then refined on the full plant (each shunt's R"
            + (" and L" if kind == "RL" else "")
            + ", Nelder-Mead) for the smallest peak of its mode at the outputs; largest peak "
            f"ratio (with / without shunts) {rule_ratio:.4g} with the rule, "
            f"{refined_ratio:.4g} refined"
        )
    info = {
        "tuning": tuning,
        "shunts": [s.to_dict() for s in shunts],
        "coupling": [
            {
                "pair": names[j],
                "actuator": struts[j],
                "mode": m,
                "coupling": float(coupling[j, m - 1]),
            }
            for j in range(len(names))
            for m in targets
        ],
        "rule": rules,
        "refined": bool(refine),
        "refinement": {
            **objective.describe(),
            "peak_ratio_rule": rule_ratio,
            "peak_ratio": refined_ratio,
        },
        "warnings": warnings,
    }
    return passive_design(plant, LAW, shunts, targets, info, pairs=names)


def _assign(coupling: np.ndarray, targets: Sequence[int]) -> list[int]:
    """Target mode of each strut: the largest total K² one to one, extra struts on their best."""
    rows, cols = linear_sum_assignment(-(coupling**2))
    out = [None] * coupling.shape[0]
    for r, c in zip(rows, cols, strict=True):
        out[r] = targets[c]
    for j, m in enumerate(out):
        if m is None:
            out[j] = targets[int(np.argmax(coupling[j]))]
    return out


def _rule(plant: ModalPlant, pair: str, strut_name: str, mode: int, kind: str):
    """The rule's shunt for one strut and mode, and its facts."""
    strut = plant.actuator(strut_name)
    _, c_blocked, d = piezo_constants(strut)
    a, b = strut.between
    g = np.asarray(plant.sites[b]) - np.asarray(plant.sites[a])
    theta = d * strut.stiffness_n_per_m * g  # N/V per unit modal coordinate
    k_modal = plant.modal_masses * plant.omegas**2
    i = mode - 1
    w = plant.omegas[i]
    others = np.arange(plant.n_modes) != i
    c_eff = c_blocked + float(
        np.sum(theta[others] ** 2 / (k_modal[others] - plant.modal_masses[others] * w**2))
    )
    if not c_eff > 0:
        c_eff = c_blocked
    k_eff = math.sqrt(theta[i] ** 2 / (k_modal[i] * c_eff))
    facts = {"capacitance_f": c_eff, "coupling": k_eff}
    if kind == "R":
        r, peak = r_shunt_rule(k_eff)
        shunt = Shunt(pair, strut_name, "R", r / (c_eff * w), None, mode)
        facts.update(resistance_ohm=shunt.resistance_ohm, fixed_point_peak=peak,
                     equivalent_damping=1.0 / (2.0 * peak))
    else:
        delta, r, peak = rl_shunt_rule(k_eff)
        shunt = Shunt(pair, strut_name, "RL", r / (c_eff * w), 1.0 / (c_eff * (delta * w) ** 2),
                      mode)
        facts.update(resistance_ohm=shunt.resistance_ohm, inductance_h=shunt.inductance_h,
                     fixed_point_peak=peak, equivalent_damping=1.0 / (2.0 * peak))
    return shunt, facts
