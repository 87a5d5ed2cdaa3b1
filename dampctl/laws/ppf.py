"""Positive position feedback (PPF): a bank of second-order filters on a collocated position.

Law and sign
    Mode ξ with a filter η (Goh & Caughey 1985; Fanson & Caughey, *AIAA J.* 28(4), 1990; from
    memory): ξ'' + 2ζωξ' + ω²ξ = g ω² η, η'' + 2ζ_f ω_f η' + ω_f² η = ω_f² ξ. On a collocated
    displacement or strain output y = Σ c_i q_i driving u (modal input b_i, residue
    r_i = b_i c_i) the filter feeds back **positively**, u = +k F(s) y with
    F(s) = ω_f²/(s² + 2ζ_f ω_f s + ω_f²), and k r_i = g ω_i² maps the normalized g to physical
    units (k = g/G_i(0), G_i(0) = r_i/ω_i² the mode's static compliance). In the convention
    u = −K(s) y of :mod:`dampctl.design` each filter is a branch with a **negative** gain −k.

Tuning rule (named): equal damping by pole coalescence
    For an undamped mode and a closed-loop damping ζ_c, matching the characteristic polynomial
    (s² + ω²)(s² + 2ζ_f ω_f s + ω_f²) − g ω² ω_f² to (s² + 2ζ_c ω s + ω²)² gives

        ω_f = ω √(1 + 4ζ_c²),   ζ_f = 2ζ_c / √(1 + 4ζ_c²),   g = 4ζ_c² / (1 + 4ζ_c²) (< 1)

    (derived for dampctl by matching to (s² + 2ζ_c ω s + ω²)²; the PPF analogue of the equal-damping
    tuned-mass damper). Every loop gets one filter per target mode it sees; a mode seen by several
    loops shares its g among them in proportion to each pair's residue, k_ki = g ω_i² r_ik / Σ_k
    r_ik², so Σ_k k_ki r_ik = g ω_i² (the single-mode derivation holds for the sum). With a target
    damping the rule is applied at ζ_c = target and ζ_c is raised until the full model (all modes,
    delay, roll-offs) reaches it; without one, ζ_c is scanned for the largest smallest closed-loop
    damping, up to ζ_c = ``MAX_RULE_DAMPING`` (0.5, g = 0.5) and a DC loop gain of at most
    ``MAX_DC_LOOP_GAIN`` (0.5): the static stiffness the loops see at most halves, a static margin
    of 2 (our choice; 1 is the stability limit).

Static stability condition (enforced)
    A single PPF loop on one mode is stable for every 0 ≤ g < 1 and unstable for g > 1, any damping
    (Routh–Hurwitz on the polynomial above; agrees with Fanson & Caughey, AIAA J. 28(4), 1990, from
    memory). In general the positive-feedback loop of a collocated (negative-imaginary) plant with
    PPF filters is stable iff the DC loop gain satisfies λ_max(G(0) K₊(0)) < 1, with K₊(0) =
    diag(Σ_i k_ki) the filters' DC gains (negative-imaginary systems: Lanzon & Petersen, *IEEE TAC*
    53(4), 2008, and Moheimani, Vautier & Bhikkaji, *IEEE TCST* 14(3), 2006 — stated from memory). A
    tuned design never breaks it; a target whose rule design breaks it is refused with
    :class:`~dampctl.errors.DesignRefused`; an explicit ``gain`` that breaks it is built and
    reported unstable.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np

from dampctl.design import Branch, Design, Loop, Section
from dampctl.errors import DesignRefused
from dampctl.laws._assemble import finish, loop_gains, setup
from dampctl.laws._checks import check_collocated
from dampctl.laws._constraints import MarginLimits
from dampctl.laws._objective import PROBE, broken_constraints, with_margins
from dampctl.laws._tuning import stack_loops
from dampctl.model.plant import ModalPlant, Pair

__all__ = [
    "MAX_DC_LOOP_GAIN",
    "MAX_RULE_DAMPING",
    "RULE",
    "design",
    "equal_damping_rule",
    "rule_damping",
]

LAW = "ppf"
RULE = (
    "equal damping (pole coalescence): w_f = w sqrt(1+4 z^2), z_f = 2z/sqrt(1+4 z^2), "
    "g = 4 z^2/(1+4 z^2)"
)
_DISPLACEMENT = ("displacement", "relative_displacement")
#: largest rule damping the tuning uses: g = 0.5, so the static stiffness seen at the pair at
#: most halves (our choice; the rule's g tends to 1 as the damping grows)
MAX_RULE_DAMPING = 0.5
#: largest DC loop gain λ_max(G(0)K(0)) a tuned design may have: a static margin of 2, the
#: same as g = 0.5 on one mode (our choice); 1 is the stability limit
MAX_DC_LOOP_GAIN = 0.5
#: filter damping rule used when an explicit gain >= 1 leaves no rule damping (our choice)
_FALLBACK_RULE_DAMPING = 0.1


def equal_damping_rule(omega: float, damping: float) -> tuple[float, float, float]:
    """Equal-damping PPF filter for a mode of natural frequency ``omega``.

    Parameters
    ----------
    omega : float
        Natural frequency ω of the mode (rad/s).
    damping : float
        Wanted closed-loop damping ratio ζ_c of the coalesced pole pair (> 0).

    Returns
    -------
    tuple of float
        (ω_f in rad/s, ζ_f, normalized gain g).
    """
    root = math.sqrt(1.0 + 4.0 * damping**2)
    return omega * root, 2.0 * damping / root, 4.0 * damping**2 / root**2


def rule_damping(gain: float) -> float:
    """Inverse of the rule's gain: ζ_c = ½ √(g / (1 − g)).

    Parameters
    ----------
    gain : float
        Normalized rule gain g, 0 < g < 1.

    Returns
    -------
    float
        The closed-loop damping ratio ζ_c the rule gives at that gain.
    """
    return 0.5 * math.sqrt(gain / (1.0 - gain))


def design(
    plant: ModalPlant,
    pairs: Sequence[str],
    *,
    modes: Sequence[int] | None = None,
    target_damping: float | None = None,
    gain: float | Sequence[float] | None = None,
    delay_s: float | None = None,
    report_margins: bool = True,
) -> Design:
    """Design PPF filter banks on collocated displacement (or strain) pairs.

    Parameters
    ----------
    plant : ModalPlant
        The plant.
    pairs : sequence of str
        Pairs of a force or strut actuator with a collocated displacement or relative
        displacement sensor, one loop each.
    modes : sequence of int, optional
        Target modes (1-based), one filter each per loop; default the plant's required modes,
        or all modes.
    target_damping : float, optional
        Closed-loop damping ratio wanted on the target modes; default the plant's
        ``min_damping``; None maximizes the smallest damping ratio.
    gain : float or sequence of float, optional
        Fixed normalized gain g of the rule (one for all loops or one per loop) instead of
        tuning; the filters then follow the rule at ζ_c = target_damping if given, else at
        ζ_c = ½√(g/(1−g)) (g < 1), else at 0.1. Not refused when it breaks the static condition:
        the design is reported unstable.
    delay_s : float, optional
        Loop delay (s); default :func:`dampctl.analysis.closedloop.plant_loop_delay_s`.
    report_margins : bool, optional
        Compute the finished design's margins into ``info`` (``margins``, ``disk_margin``,
        ``margin_requirements``; default). False skips them (sizing's unit designs).

    Returns
    -------
    Design
        ``law="ppf"``; ``Loop.gain`` is the normalized g; ``info`` holds ``ppf_rule``,
        ``rule_damping``, ``filters``, ``dc_loop_gain`` and the tuning facts.

    Raises
    ------
    DesignRefused
        For a non-collocated pair or one without a displacement-like sensor, or a target whose
        rule design breaks the static stability condition.
    """
    request = setup(
        plant,
        pairs,
        LAW,
        modes=modes,
        target_damping=target_damping,
        delay_s=delay_s,
        check_pair=lambda pair: _check_pair(plant, pair),
    )
    bank = _Bank.build(plant, request)
    model = request.model
    fixed = loop_gains(gain, len(request.pairs))
    warnings: list[str] = []
    evaluations = 0
    constraint: dict = {}
    if fixed is not None:
        if request.target_damping is not None:
            zeta_c = request.target_damping
        elif 0.0 < float(np.mean(fixed)) < 1.0:
            zeta_c = rule_damping(float(np.mean(fixed)))
        else:
            zeta_c = _FALLBACK_RULE_DAMPING
        gains, tuning, reached = fixed, "fixed gain", None
        loops = bank.loops(zeta_c, gains)
        dc = bank.dc_loop_gain(loops)
        if dc >= 1.0:
            warnings.append(
                f"static stability condition broken: DC loop gain lambda_max(G(0)K(0)) = "
                f"{dc:.4g} >= 1, the loop is UNSTABLE (lower the gain)"
            )
    else:
        limits = MarginLimits.build(plant, request.pairs, delay_s=request.delay_s)
        limits = limits if limits.stated else None
        zeta_c, evaluations, reached = _tune(bank, model, request, limits)
        if not reached:
            constraint = {
                "limited_by": _limited_by(bank, model, request, limits, zeta_c),
                "capped_modes": [],
            }
        tuning = (
            "maximize the smallest damping"
            if request.target_damping is None
            else "smallest rule damping reaching the target"
        )
        if reached is False:
            tuning = "maximize the smallest damping (target not reachable)"
        gains = np.full(len(request.pairs), equal_damping_rule(1.0, zeta_c)[2])
        loops = bank.loops(zeta_c, gains)
        dc = bank.dc_loop_gain(loops)
        if MAX_DC_LOOP_GAIN < dc < 1.0:
            warnings.append(
                f"DC loop gain {dc:.3g} is close to the static stability limit 1: the loops "
                "soften the structure a lot at low frequency (static margin under 2)"
            )
    final = model.evaluate([model.effective(stack_loops(loops))])
    evaluations += 1
    filters = [
        {
            "pair": lp.pair,
            "mode": int(b.label.split()[1]),
            "freq_hz": math.sqrt(b.sections[0].den[2]) / (2.0 * math.pi),
            "damping": b.sections[0].den[1] / (2.0 * math.sqrt(b.sections[0].den[2])),
            "gain": -b.gain,
            "gain_unit": _filter_unit(plant, lp),
        }
        for lp in loops
        for b in lp.branches
    ]
    info = {
        "gain_units": ["normalized (rule g)"] * len(loops),
        "gains": [float(g) for g in gains],
        "ppf_rule": RULE,
        "rule_damping": zeta_c,
        "filters": filters,
        "filter_gain_units": [_gain_unit(plant, p) for p in request.pairs],
        "dc_loop_gain": dc,
        "static_stability": bool(dc < 1.0),
        "static_condition": "lambda_max(G(0) K(0)) < 1 (Lanzon & Petersen 2008; from memory)",
        "evaluations": evaluations,
        **constraint,
    }
    design = finish(
        request,
        LAW,
        loops,
        final,
        tuning=tuning,
        target_met=reached,
        info=info,
        warnings=warnings,
    )
    return with_margins(design, plant, request.delay_s) if report_margins else design


class _Bank:
    """Residues, filter placement and DC gain of one PPF request (internal)."""

    def __init__(self, plant, request, residues, seen, dc_plant):
        self.plant = plant
        self.request = request
        self.residues = residues  # (n_loops, n_modes) r_ik = b_ik c_ik
        self.seen = seen  # (n_loops, n_modes) bool, filter placed
        self.dc_plant = dc_plant  # G(0), (n_loops, n_loops)

    @classmethod
    def build(cls, plant: ModalPlant, request) -> _Bank:
        pairs = request.pairs
        residues = np.array(
            [plant.input_row(p.actuator) * plant.output_row(p.sensor)[0] for p in pairs]
        )
        objective = list(request.groups.modes)
        seen = np.zeros(residues.shape, dtype=bool)
        if objective:
            strength = np.abs(residues[:, objective])
            peak = np.max(strength, axis=1, keepdims=True)
            seen[:, objective] = (residues[:, objective] > 0) & (strength >= 1e-6 * peak)
        for k, pair in enumerate(pairs):
            if not seen[k].any():
                raise DesignRefused(
                    f"pair {pair.name!r} sees none of the target modes: no PPF filter to place "
                    "(drop the pair or change --modes)",
                    field=f"pairs.{pair.name}",
                )
        actuators = [p.actuator for p in pairs]
        sensors = [p.sensor for p in pairs]
        dc_plant = plant.frf(np.zeros(1), actuators, sensors)[:, :, 0].real
        return cls(plant, request, residues, seen, dc_plant)

    def loops(self, zeta_c: float, gains: np.ndarray) -> list[Loop]:
        omegas = self.plant.omegas
        out = []
        for k, pair in enumerate(self.request.pairs):
            branches = []
            for i in np.flatnonzero(self.seen[k]):
                w_f, z_f, _g = equal_damping_rule(float(omegas[i]), zeta_c)
                share = self.residues[k, i] / np.sum(self.residues[self.seen[:, i], i] ** 2)
                k_phys = gains[k] * omegas[i] ** 2 * share
                section = Section((w_f**2,), (1.0, 2.0 * z_f * w_f, w_f**2))
                branches.append(
                    Branch(-float(k_phys), sections=(section,), label=f"mode {i + 1} filter")
                )
            out.append(
                Loop(
                    pair=pair.name,
                    actuator=pair.actuator,
                    sensor=pair.sensor,
                    gain=float(gains[k]),
                    branches=tuple(branches),
                )
            )
        return out

    def dc_loop_gain(self, loops: Sequence[Loop]) -> float:
        """λ_max(G(0) K₊(0)) with K₊(0) the filters' (positive-feedback) DC gains."""
        k_pos = np.diag([-sum(b.gain for b in lp.branches) for lp in loops])
        return float(np.max(np.linalg.eigvals(self.dc_plant @ k_pos).real))


def _responses(loops, freq_hz: np.ndarray) -> np.ndarray:
    """Diagonal controller response of decentralized loops, shape (n_freq, n, n)."""
    diag = np.stack([lp.response(freq_hz) for lp in loops], axis=-1)
    out = np.zeros((*diag.shape, diag.shape[-1]), dtype=complex)
    idx = np.arange(diag.shape[-1])
    out[:, idx, idx] = diag
    return out


def _limited_by(bank: _Bank, model, request, limits, zeta_c: float) -> list[str]:
    """What stops the rule damping from rising: the constraints broken at 1.1 ζ_c."""
    n = len(request.pairs)
    probe = zeta_c * PROBE
    loops = bank.loops(probe, np.full(n, equal_damping_rule(1.0, probe)[2]))
    if bank.dc_loop_gain(loops) > MAX_DC_LOOP_GAIN:
        return ["the static stability condition (DC loop gain)"]
    ev = model.evaluate([model.effective(stack_loops(loops))])
    check = None
    if limits is not None:
        check = limits.check_controllers(_responses(loops, limits.freq_hz)[None])
    found = broken_constraints(request, ev, 0, check, limits)
    return found or ["the smallest damping of the target modes peaks here"]


def _tune(bank: _Bank, model, request, limits=None) -> tuple[float, int, bool | None]:
    """Rule damping ζ_c: max-min damping, or the smallest reaching the target."""
    n = len(request.pairs)
    count = 0

    def scores(candidates: np.ndarray, limit: float = MAX_DC_LOOP_GAIN) -> np.ndarray:
        nonlocal count
        out = np.full(candidates.size, -np.inf)
        controllers, index, banks = [], [], []
        for j, zeta_c in enumerate(candidates):
            loops = bank.loops(float(zeta_c), np.full(n, equal_damping_rule(1.0, zeta_c)[2]))
            if bank.dc_loop_gain(loops) <= limit:
                controllers.append(model.effective(stack_loops(loops)))
                index.append(j)
                banks.append(loops)
        if controllers:
            values = model.evaluate(controllers).score
            count += len(controllers)
            if limits is not None:
                live = np.flatnonzero(np.isfinite(values))
                if live.size:
                    check = limits.check_controllers(
                        np.array([_responses(banks[j], limits.freq_hz) for j in live])
                    )
                    values[live[~check.ok]] = -np.inf
            out[index] = values
        return out

    target = request.target_damping
    if target is not None:
        gains = np.full(n, equal_damping_rule(1.0, target)[2])
        dc = bank.dc_loop_gain(bank.loops(target, gains))
        if dc >= 1.0:
            modes = ", ".join(str(i + 1) for i in request.groups.modes)
            raise DesignRefused(
                f"PPF by the equal-damping rule for damping {target:g} on mode(s) {modes} "
                f"breaks the static stability condition: DC loop gain lambda_max(G(0)K(0)) = "
                f"{dc:.4g} >= 1 (the loop would be unstable); lower --target-damping, target "
                "fewer modes, or add pairs"
            )
        reach = target * (1.0 - 1e-6)  # coalesced (repeated) poles are computed to ~1e-8
        grid = np.geomspace(target, max(MAX_RULE_DAMPING, target), 16)
        values = scores(grid, 1.0 - 1e-9)
        ok = values >= reach
        if np.any(ok):
            j = int(np.argmax(ok))
            if j > 0:
                fine = np.geomspace(grid[j - 1], grid[j], 9)
                fine_ok = scores(fine, 1.0 - 1e-9) >= reach
                return float(fine[int(np.argmax(fine_ok))]), count, True
            return float(grid[0]), count, True
    grid = np.geomspace(0.003, MAX_RULE_DAMPING, 27)
    values = scores(grid)
    if not np.any(np.isfinite(values)):
        raise DesignRefused(
            "no PPF design by the equal-damping rule keeps these loops stable (even damping "
            "0.003 breaks the static condition or the delay destabilizes the loop); target "
            "fewer modes or use --law dvf"
        )
    j = int(np.argmax(values))
    best, best_value = grid[j], values[j]
    lo, hi = grid[max(j - 1, 0)], grid[min(j + 1, grid.size - 1)]
    for _ in range(3):
        fine = np.geomspace(lo, hi, 9)
        fine_values = scores(fine)
        k = int(np.argmax(fine_values))
        if fine_values[k] > best_value:
            best, best_value = fine[k], fine_values[k]
        lo, hi = fine[max(k - 1, 0)], fine[min(k + 1, fine.size - 1)]
    return float(best), count, (None if target is None else False)


def _check_pair(plant: ModalPlant, pair: Pair) -> None:
    sensor = plant.sensor(pair.sensor)
    if sensor.kind not in _DISPLACEMENT:
        raise DesignRefused(
            f"PPF needs a displacement or strain (relative displacement) sensor, but pair "
            f"{pair.name!r} has a {sensor.kind} sensor"
            + ("; use --law iff for a strut force sensor" if sensor.kind == "force" else "")
            + ("; use --law dvf for a velocity sensor" if "velocity" in sensor.kind else ""),
            field=f"pairs.{pair.name}",
        )
    check_collocated(plant, pair, LAW)


def _gain_unit(plant: ModalPlant, pair: Pair) -> str:
    actuator = plant.actuator(pair.actuator)
    return "N/m" if actuator.kind == "force" else "m/m"


def _filter_unit(plant: ModalPlant, loop) -> str:
    """Unit of a filter's physical gain k: actuator unit per sensor unit (e.g. N/m)."""
    actuator = "N" if plant.actuator(loop.actuator).kind == "force" else "m"
    return f"{actuator}/{plant.sensor(loop.sensor).unit}"
