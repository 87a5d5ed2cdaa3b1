"""Tuned-mass dampers (TMD): one absorber per target mode, tuned, then refined on the full plant.

Law
    An absorber of mass m_a on a spring k and a dashpot c is attached at a site. For one mode
    of modal mass m_i and shape φ_i(site) the site carries the effective mass
    M = m_i / φ_i(site)², and the mass ratio is μ = m_a / M. The absorber is modelled exactly
    (:mod:`dampctl.analysis.passive`): it adds its own two states, and its mass loads every
    mode below its frequency (the static mass effect), not only the target.

Rule (the start)
    Den Hartog's tuning for an undamped primary under a harmonic force: frequency ratio
    f_a / f_i = 1 / (1 + μ) and Brock's damping ζ_a = √(3μ / (8 (1 + μ)³)), which make the two
    fixed points of the response equal in height, √(1 + 2/μ) times the static response, and
    put the peaks on them (J. P. Den Hartog, *Mechanical Vibrations*, 4th ed. 1956, the damped
    vibration absorber; J. E. Brock, "A note on the damped vibration absorber", J. Appl. Mech.
    13, A-284, 1946; both from memory).

Refinement
    The rule ignores the structure's own damping, the other modes and the other absorbers. Each
    absorber's frequency and damping ratio are then refined (Nelder–Mead on their logarithms,
    starting from the rule) for the smallest response peak of its own mode at the plant's
    outputs, as a ratio to the peak without absorbers, mode by mode and twice round
    (:mod:`dampctl.laws._passive`: inputs, outputs and band are recorded in
    ``info.refinement``). The result is kept only when the largest ratio over the target modes
    is no worse than the rule's; ``refine=False`` keeps the rule.

Site
    Default: for each mode, the site where |φ_i| is largest (the smallest effective mass). A
    site must be a point of the structure that can carry a mass along its direction — not a
    derived direction such as the stroke between two bodies; give ``sites`` when the largest
    shape value is such a direction.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np

from dampctl.design import Design
from dampctl.errors import UsageError
from dampctl.laws._passive import PeakObjective, mode_numbers, passive_design, refine_parts
from dampctl.model.passive import Absorber
from dampctl.model.plant import ModalPlant

__all__ = ["den_hartog", "design"]

LAW = "tmd"
#: a common-practice starting mass ratio (1 to 5 % is usual)
DEFAULT_MASS_RATIO = 0.02


def den_hartog(mass_ratio: float) -> tuple[float, float]:
    """Den Hartog's frequency ratio and Brock's damping ratio for an undamped primary.

    Parameters
    ----------
    mass_ratio : float
        μ = absorber mass / effective mass of the mode at the site, > 0.

    Returns
    -------
    frequency_ratio : float
        f_absorber / f_mode = 1 / (1 + μ).
    damping : float
        ζ_absorber = √(3μ / (8 (1 + μ)³)).
    """
    mu = float(mass_ratio)
    if not (math.isfinite(mu) and mu > 0):
        raise UsageError(f"mass ratio must be > 0, got {mass_ratio!r}", field="mass_ratio")
    return 1.0 / (1.0 + mu), math.sqrt(3.0 * mu / (8.0 * (1.0 + mu) ** 3))


def design(
    plant: ModalPlant,
    *,
    modes: Sequence[int] | None = None,
    mass_ratio: float | Sequence[float] = DEFAULT_MASS_RATIO,
    split: str = "each",
    sites: str | Sequence[str] | None = None,
    refine: bool = True,
) -> Design:
    """Design tuned-mass dampers, one per target mode.

    Parameters
    ----------
    plant : ModalPlant
        The plant.
    modes : sequence of int, optional
        Target modes (1-based); default the plant's required modes.
    mass_ratio : float or sequence of float, optional
        μ per absorber (one value for all, or one per target mode), or with ``split="total"``
        the sum of the μ of all absorbers, shared equally (default 0.02, common practice).
    split : {"each", "total"}, optional
        How a single ``mass_ratio`` is read (default ``each``).
    sites : str or sequence of str, optional
        Where each absorber sits (one site for all, or one per mode); default the site where
        the mode's shape is largest.
    refine : bool, optional
        Refine the rule on the full plant for the smallest output peak (default True).

    Returns
    -------
    Design
        Law ``tmd``; ``info.absorbers`` lists ``mode``, ``site``, ``mass_kg``, ``freq_hz``,
        ``damping``, ``stiffness_n_per_m``, ``damping_n_s_per_m``.
    """
    targets = mode_numbers(plant, modes, LAW)
    ratios = _ratios(mass_ratio, split, len(targets))
    chosen = _sites(plant, sites, targets)
    warnings = []
    absorbers, effective, rule = [], [], []
    for m, mu, site in zip(targets, ratios, chosen, strict=True):
        shape = float(plant.sites[site][m - 1])
        if abs(shape) < 1e-12 * max(1.0, float(np.max(np.abs(plant.sites[site])))):
            raise UsageError(
                f"mode {m} does not move site {site!r} (shape value 0): an absorber there "
                "cannot damp it",
                field="sites",
            )
        m_eff = plant.modes[m - 1].modal_mass_kg / shape**2
        ratio, zeta = den_hartog(mu)
        f = plant.freqs_hz[m - 1] * ratio
        absorbers.append(Absorber(mode=m, site=site, mass_kg=mu * m_eff, freq_hz=f, damping=zeta))
        effective.append(m_eff)
        rule.append({"mode": m, "mass_ratio": mu, "freq_hz": f, "damping": zeta})
        if mu > 0.2:
            warnings.append(
                f"mode {m}: mass ratio {mu:.3g} is large (an absorber above about 10 % of the "
                "effective mass is unusual and heavy; common practice)"
            )
    objective = PeakObjective(plant, absorbers, targets)
    rule_ratio = objective.ratio(absorbers)
    refined_ratio = rule_ratio
    if refine:
        absorbers, rule_ratio, refined_ratio = refine_parts(
            objective,
            absorbers,
            targets,
            lambda a: [a.freq_hz, a.damping],
            lambda a, v: Absorber(a.mode, a.site, a.mass_kg, v[0], v[1]),
        )
    shared = {s for s in chosen if chosen.count(s) > 1}
    if shared:
        warnings.append(
            f"several absorbers share site(s) {', '.join(sorted(shared))}: each is tuned to its "
            "own mode, and they act on each other through the site"
        )
    tuning = (
        "Den Hartog / Brock rule for an undamped primary (f_a = f/(1+mu), zeta_a = "
        "sqrt(3 mu/(8 (1+mu)^3)))"
    )
    if refine:
        tuning += (
            ", then refined on the full plant (each absorber's frequency and damping, "
            "Nelder-Mead) for the smallest peak of its mode at the outputs; largest peak ratio "
            f"(with / without absorbers) {rule_ratio:.4g} with the rule, {refined_ratio:.4g} "
            "refined"
        )
    info = {
        "tuning": tuning,
        "absorbers": [a.to_dict() for a in absorbers],
        "rule": rule,
        "mass_ratio": list(ratios),
        "effective_mass_kg": effective,
        "refined": bool(refine),
        "refinement": {
            **objective.describe(),
            "peak_ratio_rule": rule_ratio,
            "peak_ratio": refined_ratio,
        },
        "warnings": warnings,
    }
    return passive_design(plant, LAW, absorbers, targets, info)


def _ratios(mass_ratio, split: str, n: int) -> list[float]:
    if split not in ("each", "total"):
        raise UsageError(f"split must be each or total, got {split!r}", field="split")
    values = [mass_ratio] if np.ndim(mass_ratio) == 0 else list(mass_ratio)
    try:
        values = [float(v) for v in values]
    except (TypeError, ValueError):
        raise UsageError(f"mass ratio: expected numbers, got {mass_ratio!r}") from None
    if not values or not all(math.isfinite(v) and v > 0 for v in values):
        raise UsageError(f"mass ratio must be > 0, got {mass_ratio!r}", field="mass_ratio")
    if split == "total":
        if len(values) != 1:
            raise UsageError("a total mass ratio is one number", field="mass_ratio")
        return [values[0] / n] * n
    if len(values) == 1:
        return values * n
    if len(values) != n:
        raise UsageError(
            f"{len(values)} mass ratios for {n} target modes (give one, or one per mode)",
            field="mass_ratio",
        )
    return values


def _sites(plant: ModalPlant, sites, targets) -> list[str]:
    if sites is None:
        names = list(plant.sites)
        out = []
        for m in targets:
            values = [abs(float(plant.sites[s][m - 1])) for s in names]
            out.append(names[int(np.argmax(values))])
        return out
    given = [sites] if isinstance(sites, str) else list(sites)
    for name in given:
        if name not in plant.sites:
            known = ", ".join(sorted(plant.sites))
            raise UsageError(f"unknown site {name!r} (known: {known})", field="sites")
    if len(given) == 1:
        return given * len(targets)
    if len(given) != len(targets):
        raise UsageError(
            f"{len(given)} sites for {len(targets)} target modes (give one, or one per mode)",
            field="sites",
        )
    return given
