"""Viscous dampers: the dashpot in series with a spring against its closed form (A. Preumont,
Vibration Control of Active Structures, 3rd ed. 2011, passive damping / the IFF root locus;
from memory, derived below) and brute-force optima on independent models."""

import numpy as np
import pytest
from scipy.optimize import minimize_scalar

from dampctl.analysis.passive import passive_statespace
from dampctl.errors import UsageError
from dampctl.laws import viscous
from dampctl.model.components import Mode
from dampctl.model.passive import Damper
from dampctl.model.plant import ModalPlant

M, K = 2.0, 8.0e4


def sdof(damping=0.0):
    return ModalPlant(modes=[Mode(np.sqrt(K / M) / (2 * np.pi), damping, modal_mass_kg=M)],
                      sites={"x": [1.0]})


def cubic_damping(c, ks):
    """Smallest damping ratio of m s² + k + s·c k_s/(c s + k_s) = 0, i.e. the cubic
    m c s³ + m k_s s² + c (k + k_s) s + k k_s (an independent brute-force model)."""
    roots = np.roots([M * c, M * ks, c * (K + ks), K * ks])
    pair = roots[np.abs(roots.imag) > 1e-9 * np.abs(roots)]
    return float(np.min(-pair.real / np.abs(pair))) if pair.size else 1.0


@pytest.mark.parametrize("ks", [2.0e4, 8.0e3])
def test_damper_in_series_with_a_spring(ks):
    # Derivation: with g = k_s/c the characteristic cubic is s³ + g s² + ω_∞² s + g ω₀²
    # (ω₀² = k/m, ω_∞² = (k + k_s)/m); writing it (s + a)(s² + 2ζωs + ω²) gives
    # ζ² = (ω_∞² − ω²)(ω² − ω₀²)/(4 ω² ω₀²), largest at ω² = ω₀ω_∞: ζ_max = (ω_∞ − ω₀)/(2ω₀),
    # at g = ω_∞ √(ω_∞/ω₀) (the IFF result of Preumont, exact here for one mode)
    w0, winf = np.sqrt(K / M), np.sqrt((K + ks) / M)
    c_formula, zeta_formula = viscous.maxwell_optimum(w0, winf, ks)
    assert c_formula == pytest.approx(ks / (winf * np.sqrt(winf / w0)), rel=1e-15)
    assert zeta_formula == pytest.approx((winf - w0) / (2 * w0), rel=1e-15)
    brute = minimize_scalar(lambda x: -cubic_damping(np.exp(x), ks), bounds=(-5.0, 10.0),
                            method="bounded", options={"xatol": 1e-10})
    assert np.exp(brute.x) == pytest.approx(c_formula, rel=1e-5)
    assert -brute.fun == pytest.approx(zeta_formula, rel=1e-9)
    design = viscous.design(sdof(), ("x", "ground"), modes=[1], stiffness_n_per_m=ks)
    (d,) = design.parts
    assert d.coefficient_n_s_per_m == pytest.approx(c_formula, rel=1e-4)
    assert design.info["min_damping"] == pytest.approx(zeta_formula, rel=1e-8)
    (bound,) = design.info["bounds"]
    assert bound["max_damping"] == pytest.approx(zeta_formula, rel=1e-12)
    assert bound["coefficient_n_s_per_m"] == pytest.approx(c_formula, rel=1e-12)
    assert design.info["dampers"] == [{"between": ["x", "ground"],
                                       "coefficient_n_s_per_m": d.coefficient_n_s_per_m}]


def test_damper_between_two_masses_against_a_brute_force_scan():
    # 2-DOF chain ground–k1–m1–k2–m2, dashpot across k2: the smallest damping of both modes,
    # maximized by a dense scan of c on the lumped model M x'' + C x' + K x = 0 (plain numpy)
    m1, m2, k1, k2 = 1.0, 0.5, 5e5, 2e5
    Mm, Km = np.diag([m1, m2]), np.array([[k1 + k2, -k2], [-k2, k2]])
    plant = ModalPlant.from_lumped(Mm, Km, ["a", "b"])

    def smallest(c):
        Cm = c * np.array([[1.0, -1.0], [-1.0, 1.0]])
        A = np.block([[np.zeros((2, 2)), np.eye(2)],
                      [-np.linalg.solve(Mm, Km), -np.linalg.solve(Mm, Cm)]])
        p = np.linalg.eigvals(A)
        p = p[p.imag > 1e-9]
        return np.min(-p.real / np.abs(p)) if p.size == 2 else 0.0

    scan = np.geomspace(1.0, 1e4, 4001)
    values = np.array([smallest(c) for c in scan])
    design = viscous.design(plant, ("a", "b"), modes=[1, 2])
    assert design.info["min_damping"] == pytest.approx(values.max(), rel=1e-4)
    assert design.info["min_damping"] >= values.max() * (1 - 1e-6)
    (d,) = design.parts
    assert d.coefficient_n_s_per_m == pytest.approx(scan[np.argmax(values)], rel=0.01)
    poles = np.linalg.eigvals(passive_statespace(plant, design.parts)[0])
    assert np.max(poles.real) < 0


def test_rigid_damper_on_one_mode_can_overdamp_it():
    design = viscous.design(sdof(0.01), ("ground", "x"), modes=[1])
    assert design.info["min_damping"] == pytest.approx(1.0)
    (d,) = design.parts
    critical = 2 * np.sqrt(K * M) * (1 - 0.01)
    assert critical <= d.coefficient_n_s_per_m <= 1.4 * critical  # the scan's step is 1.33x
    assert design.info["bounds"] == []


def test_fixed_coefficient_and_unseen_modes():
    plant = ModalPlant(modes=[Mode(10.0, 0.01), Mode(30.0, 0.01)],
                       sites={"a": [1.0, 0.0], "b": [1.0, 1.0]})
    fixed = viscous.design(plant, ("a", "ground"), modes=[1, 2], coefficient=5.0)
    assert fixed.parts[0].coefficient_n_s_per_m == 5.0
    assert fixed.info["tuning"] == "fixed coefficient(s)"
    assert any("mode(s) 2" in w for w in fixed.info["warnings"])
    assert fixed.info["tuned_modes"] == [1]
    two = viscous.design(plant, [("a", "ground"), ("b", "ground")], modes=[1, 2])
    assert len(two.parts) == 2 and not two.info["warnings"]


@pytest.mark.parametrize(
    ("between", "kwargs", "match"),
    [
        (("x", "x"), {}, "two different points"),
        (("x", "nowhere"), {}, "unknown site"),
        ("x", {}, "two site names"),
        (("x", "ground"), {"stiffness_n_per_m": -1.0}, "must be > 0"),
        (("x", "ground"), {"coefficient": [1.0, 2.0]}, "2 values for 1"),
    ],
)
def test_bad_input(between, kwargs, match):
    with pytest.raises(UsageError, match=match):
        viscous.design(sdof(), between, modes=[1], **kwargs)


def test_a_damper_that_does_not_move():
    plant = ModalPlant(modes=[Mode(10.0, 0.01)], sites={"a": [1.0], "b": [1.0]})
    with pytest.raises(UsageError, match="cannot damp"):
        viscous.design(plant, ("a", "b"), modes=[1])
    # a plant site called "ground" is the plant's own (here it moves: the damper sees 1 − 0.5)
    moving = ModalPlant(modes=[Mode(10.0, 0.01)], sites={"a": [1.0], "ground": [0.5]})
    fixed = viscous.design(moving, ("a", "ground"), modes=[1], coefficient=2.0)
    rigid = viscous.design(ModalPlant(modes=[Mode(10.0, 0.01)], sites={"a": [0.5]}),
                           ("a", "ground"), modes=[1], coefficient=2.0)
    assert fixed.info["min_damping"] == pytest.approx(rigid.info["min_damping"], rel=1e-12)


def test_damper_part_validation():
    from dampctl.errors import DesignError

    with pytest.raises(DesignError, match="coefficient_n_s_per_m"):
        Damper(("a", "b"), 0.0)
    with pytest.raises(DesignError, match="two different points"):
        Damper(("ground", "ground"), 1.0)
