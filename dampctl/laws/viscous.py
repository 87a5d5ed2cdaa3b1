"""Viscous dampers between two sites (or a site and the ground), sized for the smallest damping.

Law
    A dashpot of coefficient c joins two sites (``ground`` for the fixed ground), optionally
    through a mounting of stiffness k_s in series (a Maxwell element: a real damper's support
    and fittings are never rigid). It is modelled exactly (:mod:`dampctl.analysis.passive`).

Tuning
    The coefficient maximizes the smallest closed-loop damping ratio over the target modes, on
    the full plant: a scan of c over seven decades around the scale 2 m_i ω_i / r_i² (where
    the dashpot alone would add a damping ratio of one, r_i = φ_i(b) − φ_i(a)), then a
    bounded golden-section refinement; on a plateau of equal damping (an overdamped mode) the
    smallest c of the scan wins.
    Several dampers are tuned in turn, each with the others fixed, for three rounds.

What to expect (single-mode estimate, exact for one mode and an undamped structure)
    With the mounting spring the root locus in c is that of integral force feedback: it runs
    from the mode's frequency ω₀ (c = 0) to the frequency ω_∞ of the structure with the spring
    in place of the damper (c → ∞), and the largest damping is

        ζ_max = (ω_∞ − ω₀) / (2 ω₀),   at c_opt = k_s / (ω_∞ √(ω_∞ / ω₀)),

    so the stiffness ratio bounds what the damper can give (A. Preumont, *Vibration Control of
    Active Structures*, 3rd ed. 2011, passive damping with a viscous damper in series with a
    spring, and the integral-force-feedback root locus; from memory, and derived for the test:
    the characteristic cubic s³ + g s² + ω_∞² s + g ω₀² with g = k_s / c). A rigid mounting
    makes ω_∞ the frequency with the two sites locked together, and a mode the damper moves
    alone can then be overdamped. ``info.bounds`` gives the estimate per target mode and damper
    with a mounting spring.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np
from scipy.optimize import linear_sum_assignment, minimize_scalar

from dampctl.analysis.passive import pair_part_poles, passive_model, passive_statespace, with_parts
from dampctl.design import Design
from dampctl.errors import UsageError
from dampctl.laws._passive import mode_numbers, passive_design
from dampctl.model.passive import GROUND, Damper
from dampctl.model.plant import ModalPlant

__all__ = ["design", "maxwell_optimum"]

LAW = "viscous"
#: relative tie in the smallest damping below which the smaller coefficient wins (a plateau,
#: e.g. a mode overdamped beyond a coefficient)
_TIE = 1e-9


def maxwell_optimum(
    omega_0: float, omega_inf: float, stiffness_n_per_m: float
) -> tuple[float, float]:
    """Best coefficient and damping of a dashpot in series with a spring on one mode.

    Parameters
    ----------
    omega_0 : float
        The mode's natural frequency without the element (rad/s).
    omega_inf : float
        Its natural frequency with the spring in place of the element (c → ∞), > omega_0.
    stiffness_n_per_m : float
        The series spring k_s (N/m), in the units of the port (for a modal port of unit modal
        mass, the generalized stiffness).

    Returns
    -------
    coefficient : float
        c_opt = k_s / (ω_∞ √(ω_∞ / ω₀)) (N·s/m).
    damping : float
        ζ_max = (ω_∞ − ω₀) / (2 ω₀).
    """
    if not 0.0 < omega_0 < omega_inf:
        raise UsageError(f"need 0 < omega_0 < omega_inf, got {omega_0!r}, {omega_inf!r}")
    c = stiffness_n_per_m / (omega_inf * math.sqrt(omega_inf / omega_0))
    return c, (omega_inf - omega_0) / (2.0 * omega_0)


def design(
    plant: ModalPlant,
    between: Sequence[str] | Sequence[Sequence[str]],
    *,
    modes: Sequence[int] | None = None,
    stiffness_n_per_m: float | Sequence[float | None] | None = None,
    coefficient: float | Sequence[float] | None = None,
) -> Design:
    """Design viscous dampers for the largest smallest damping of the target modes.

    Parameters
    ----------
    plant : ModalPlant
        The plant.
    between : pair of str, or sequence of pairs
        The two sites each damper joins (``"ground"`` for the fixed ground).
    modes : sequence of int, optional
        Target modes (1-based); default the plant's required modes.
    stiffness_n_per_m : float or sequence, optional
        Mounting stiffness in series with each dashpot (N/m); None: rigid.
    coefficient : float or sequence of float, optional
        Fixed coefficient(s) (N·s/m) instead of tuning.

    Returns
    -------
    Design
        Law ``viscous``; ``info.dampers`` lists ``between`` and ``coefficient_n_s_per_m``.
    """
    targets = mode_numbers(plant, modes, LAW)
    links = _links(plant, between)
    springs = _each(stiffness_n_per_m, len(links), "stiffness_n_per_m", allow_none=True)
    fixed = _each(coefficient, len(links), "coefficient", allow_none=True)
    rows = [_row(plant, b) - _row(plant, a) for a, b in links]
    reach = _reached(rows, targets)
    if not reach:
        raise UsageError(
            f"the damper(s) do not move with mode(s) {', '.join(map(str, targets))} (their "
            "sites move together in these modes): they cannot damp them",
            field="between",
        )
    warnings = []
    unseen = [m for m in targets if m not in reach]
    if unseen:
        warnings.append(
            f"no damper moves with mode(s) {', '.join(map(str, unseen))}: they keep their own "
            "damping and are left out of the tuning (add a damper across points these modes "
            "move apart)"
        )
    scales = [_scale(plant, r, reach) for r in rows]
    start = [f if f is not None else s for f, s in zip(fixed, scales, strict=True)]
    dampers = [
        Damper(link, c, k) for link, c, k in zip(links, start, springs, strict=True)
    ]
    model = passive_model(plant, dampers)

    def smallest(parts) -> float:
        A = passive_statespace(plant, with_parts(model, plant, parts))[0]
        result = pair_part_poles(plant, model, np.linalg.eigvals(A)).matched
        return float(min(result.damping[m - 1] for m in reach))

    if any(f is None for f in fixed):
        for _ in range(3 if len(dampers) > 1 else 1):
            for k in range(len(dampers)):
                if fixed[k] is None:
                    dampers[k] = _tune_one(dampers, k, scales[k], smallest)
    tuned = "fixed coefficient(s)" if all(f is not None for f in fixed) else (
        "coefficient(s) maximizing the smallest damping ratio of the target modes on the full "
        "plant (scan over seven decades, golden-section refinement)"
    )
    info = {
        "tuning": tuned,
        "dampers": [d.to_dict() for d in dampers],
        "mounting_stiffness_n_per_m": list(springs),
        "bounds": _bounds(plant, rows, springs, reach),
        "tuned_modes": list(reach),
        "warnings": warnings,
    }
    return passive_design(plant, LAW, dampers, targets, info)


def _tune_one(dampers: list[Damper], k: int, scale: float, smallest) -> Damper:
    """Best coefficient of damper k with the others fixed: log scan, then golden section."""
    exponents = np.linspace(-5.0, 2.0, 57)

    def value(x: float) -> float:
        trial = list(dampers)
        trial[k] = Damper(dampers[k].between, scale * 10.0**x, dampers[k].stiffness_n_per_m)
        return smallest(trial)

    values = np.array([value(x) for x in exponents])
    best = int(np.argmax(values))
    lo = exponents[max(best - 1, 0)]
    hi = exponents[min(best + 1, exponents.size - 1)]
    found = minimize_scalar(lambda x: -value(x), bounds=(lo, hi), method="bounded",
                            options={"xatol": 1e-5})
    x, top = float(found.x), -float(found.fun)
    if values[best] > top:
        x, top = float(exponents[best]), float(values[best])
    # on a plateau (overdamped modes) the smallest coefficient within the tie wins
    smaller = [e for e, v in zip(exponents, values, strict=True) if e < x and v >= top * (1 - _TIE)]
    if smaller:
        x = float(min(smaller))
    return Damper(dampers[k].between, scale * 10.0**x, dampers[k].stiffness_n_per_m)


def _links(plant: ModalPlant, between) -> list[tuple[str, str]]:
    if isinstance(between, str):
        raise UsageError("between: expected two site names [a, b] (or [a, 'ground'])")
    items = list(between)
    links = [items] if items and isinstance(items[0], str) else items
    out = []
    for link in links:
        link = tuple(link)
        if len(link) != 2 or link[0] == link[1] or set(link) == {GROUND}:
            raise UsageError(
                f"between: expected two different points [a, b], got {list(link)}",
                field="between",
            )
        for name in link:
            if name != GROUND and name not in plant.sites:
                known = ", ".join(sorted(plant.sites))
                raise UsageError(
                    f"unknown site {name!r} (known: {known}; or {GROUND})", field="between"
                )
        out.append(link)
    if not out:
        raise UsageError("between: give at least one damper")
    return out


def _each(value, n: int, name: str, *, allow_none: bool) -> list:
    values = [value] if value is None or np.ndim(value) == 0 else list(value)
    if len(values) == 1:
        values = values * n
    if len(values) != n:
        raise UsageError(f"{name}: {len(values)} values for {n} dampers", field=name)
    out = []
    for v in values:
        if v is None and allow_none:
            out.append(None)
            continue
        v = float(v)
        if not (math.isfinite(v) and v > 0):
            raise UsageError(f"{name} must be > 0, got {v!r}", field=name)
        out.append(v)
    return out


def _row(plant: ModalPlant, site: str) -> np.ndarray:
    if site == GROUND and GROUND not in plant.sites:
        return np.zeros(plant.n_modes)
    return np.asarray(plant.sites[site], float)


def _reached(rows, targets) -> list[int]:
    """Target modes (1-based) some damper moves with (|r_i| above 1e-9 of its largest)."""
    out = []
    for m in targets:
        if any(abs(r[m - 1]) > 1e-9 * max(float(np.max(np.abs(r))), 1e-300) for r in rows):
            out.append(m)
    return out


def _scale(plant: ModalPlant, row: np.ndarray, targets) -> float:
    """Coefficient (N·s/m) at which the dashpot alone adds damping one to a target mode."""
    values = []
    for m in targets:
        r = row[m - 1]
        if abs(r) > 0:
            values.append(2.0 * plant.modes[m - 1].modal_mass_kg * plant.omegas[m - 1] / r**2)
    return float(np.median(values))


def _bounds(plant: ModalPlant, rows, springs, targets) -> list[dict]:
    """Single-mode estimate of the best damping of each target mode, per damper with a
    mounting spring (module docstring); a rigid damper can overdamp a mode it moves alone."""
    masses = np.sqrt(plant.modal_masses)
    w0 = plant.omegas
    out = []
    for k, (row, ks) in enumerate(zip(rows, springs, strict=True)):
        if ks is None:
            continue
        r = row / masses  # mass-normalized port row
        stiff = np.diag(w0**2) + ks * np.outer(r, r)
        w_inf = np.sqrt(np.maximum(np.linalg.eigvalsh(stiff), 0.0))
        # each mode's stiffened frequency, by assignment (the spring only raises them)
        cost = np.abs(np.log(np.maximum(w_inf[None, :], 1e-300) / w0[:, None]))
        rows_, cols = linear_sum_assignment(cost)
        paired = dict(zip(rows_, w_inf[cols], strict=True))
        for m in targets:
            wi = paired.get(m - 1)
            entry = {"damper": k + 1, "mode": m, "locked_freq_hz": None, "max_damping": None,
                     "coefficient_n_s_per_m": None}
            if wi is not None and wi > w0[m - 1] * (1 + 1e-12):
                entry["locked_freq_hz"] = float(wi / (2 * math.pi))
                entry["max_damping"] = float((wi - w0[m - 1]) / (2 * w0[m - 1]))
                entry["coefficient_n_s_per_m"] = float(maxwell_optimum(w0[m - 1], wi, ks)[0])
            out.append(entry)
    return out
