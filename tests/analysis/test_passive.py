"""Passive parts as an augmentation of the plant: elements against their physics, poles and
FRFs against lumped mass-spring-dashpot models solved independently with numpy and
python-control."""

import control
import numpy as np
import pytest

from dampctl.analysis.passive import (
    PassiveSweep,
    part_element,
    passive_frf,
    passive_model,
    passive_modes,
    passive_statespace,
    piezo_constants,
    with_parts,
)
from dampctl.errors import DesignError
from dampctl.model.components import Actuator, Disturbance, Mode, Output, Pair, Sensor
from dampctl.model.passive import Absorber, Damper, Shunt
from dampctl.model.plant import ModalPlant

M, K, CP = 2.0, 8.0e4, 8.0  # the primary: 2 kg on 8e4 N/m with 8 N·s/m (omega 200 rad/s)
ZETA = CP / (2 * np.sqrt(K * M))


def primary(damping=ZETA):
    return ModalPlant(
        modes=[Mode(np.sqrt(K / M) / (2 * np.pi), damping, modal_mass_kg=M)],
        sites={"x": [1.0], "g": [0.0]},
        outputs=[Output("xo", "displacement", site="x")],
        disturbances=[Disturbance("push", "x", 1e-4)],
    )


def piezo_primary(k=0.4, ks=3.0e4, cap=2e-6):
    plant = primary()
    return ModalPlant(
        modes=plant.modes,
        sites=plant.sites,
        actuators=[Actuator("pz", "strut", between=("g", "x"), stiffness_n_per_m=ks,
                            capacitance_f=cap, coupling_k=k)],
        sensors=[Sensor("F", "force", actuator="pz")],
        pairs=[Pair("p", "pz", "F")],
        outputs=plant.outputs,
        disturbances=plant.disturbances,
    )


def lumped_poles(Mm, Cm, Km):
    """Eigenvalues of M x'' + C x' + K x = 0 in first-order form (plain numpy)."""
    n = Mm.shape[0]
    A = np.block(
        [[np.zeros((n, n)), np.eye(n)], [-np.linalg.solve(Mm, Km), -np.linalg.solve(Mm, Cm)]]
    )
    return np.linalg.eigvals(A)


def same_poles(a, b, rtol):
    a, b = np.sort_complex(np.asarray(a)), np.sort_complex(np.asarray(b))
    assert a.shape == b.shape
    assert np.max(np.abs(a - b)) <= rtol * np.max(np.abs(b))


S = 1j * np.geomspace(10.0, 5000.0, 37)


def test_absorber_element_is_its_dynamic_mass():
    # force on the site from its velocity: m s (c s + k) / (m s² + c s + k) (Newton, by hand)
    a = Absorber(1, "x", 0.1, 30.0, 0.12)
    k, c, m = a.stiffness_n_per_m, a.damping_n_s_per_m, a.mass_kg
    e = part_element(primary(), a)
    assert np.allclose(e.response(S), m * S * (c * S + k) / (m * S**2 + c * S + k), rtol=1e-12)
    # stroke per site velocity: (x_a − x)/v = −m s / (s (m s² + c s + k)) · s = −m s/(m s²+cs+k)
    assert np.allclose(e.load_response(S), -m * S / (m * S**2 + c * S + k), rtol=1e-12)
    assert k == pytest.approx(m * (2 * np.pi * 30.0) ** 2)
    assert c == pytest.approx(2 * 0.12 * m * 2 * np.pi * 30.0)


def test_damper_elements():
    rigid = part_element(primary(), Damper(("x", "g"), 40.0))
    assert np.allclose(rigid.response(S), 40.0)
    maxwell = part_element(primary(), Damper(("x", "g"), 40.0, 1e4))
    assert np.allclose(maxwell.response(S), 40.0 * 1e4 / (40.0 * S + 1e4), rtol=1e-12)
    assert maxwell.matrices[0].shape == (1, 1)


@pytest.mark.parametrize("network", ["R", "RL"])
def test_shunt_element_matches_the_strut_equations(network):
    # f = k_s (Δ − d V), Q = d k_s Δ + C_ε V, V = −Z_e s Q
    #   ⇒  δ = d V = −k² C s Z_e/(1 + C_ε s Z_e) Δ
    # (Hagood & von Flotow, J. Sound Vib. 146(2), 1991, the piezo as a two-port, from memory)
    plant = piezo_primary()
    strut = plant.actuator("pz")
    R, L = 800.0, (2.5 if network == "RL" else None)
    e = part_element(plant, Shunt("p", "pz", network, R, L))
    C, k = strut.capacitance_f, strut.coupling_k
    c_blocked = C * (1 - k**2)
    Ze = R + (L * S if L else 0)
    expected = k**2 * C * S * Ze / (1 + c_blocked * S * Ze)
    assert np.allclose(e.response(S), expected, rtol=1e-11)
    kappa, cb, d = piezo_constants(strut)
    assert cb == pytest.approx(c_blocked) and kappa == pytest.approx(k**2 / (1 - k**2))
    assert d**2 * strut.stiffness_n_per_m / C == pytest.approx(k**2)
    # the load is the voltage V = δ/d = −Z Δ / d
    assert np.allclose(e.load_response(S), -expected / d, rtol=1e-11)


def test_open_circuit_stiffens_the_strut_by_one_over_one_minus_k2():
    plant = piezo_primary()
    strut = plant.actuator("pz")
    open_circuit = passive_modes(plant, [Shunt("p", "pz", "R", 1e12)]).matched
    k_open = K + strut.stiffness_n_per_m * strut.coupling_k**2 / (1 - strut.coupling_k**2)
    assert open_circuit.freq_hz[0] == pytest.approx(np.sqrt(k_open / M) / (2 * np.pi), rel=1e-6)


def test_absorber_poles_match_the_two_dof_lumped_model():
    # primary (M, K, c_p) with an absorber (m, k, c) on it: M x'' + C x' + K x = 0
    a = Absorber(1, "x", 0.1, 29.0, 0.11)
    m, k, c = a.mass_kg, a.stiffness_n_per_m, a.damping_n_s_per_m
    Mm = np.diag([M, m])
    Km = np.array([[K + k, -k], [-k, k]])
    Cm = np.array([[CP + c, -c], [-c, c]])
    A = passive_statespace(primary(), [a])[0]
    same_poles(np.linalg.eigvals(A), lumped_poles(Mm, Cm, Km), 1e-12)


def test_from_lumped_two_dof_with_a_damper_between_the_masses():
    # the same system built the other way: ModalPlant.from_lumped of the undamped 2-DOF model,
    # with a viscous damper between the two masses, against the absorber on the 1-mode plant
    a = Absorber(1, "x", 0.1, 29.0, 0.11)
    m, k, c = a.mass_kg, a.stiffness_n_per_m, a.damping_n_s_per_m
    two = ModalPlant.from_lumped(np.diag([M, m]), np.array([[K + k, -k], [-k, k]]), ["x", "a"])
    with_damper = np.linalg.eigvals(passive_statespace(two, [Damper(("x", "a"), c)])[0])
    with_absorber = np.linalg.eigvals(passive_statespace(primary(0.0), [a])[0])
    same_poles(with_damper, with_absorber, 1e-10)


def test_maxwell_damper_between_sites_matches_the_lumped_model():
    # two masses on springs, a dashpot c in series with k_s between them: the element's force
    # is a third, massless coordinate (plain numpy: a first-order state for the force)
    m1, m2, k1, k2, c, ks = 1.0, 0.5, 5e5, 2e5, 30.0, 4e4
    plant = ModalPlant.from_lumped(np.diag([m1, m2]), np.array([[k1 + k2, -k2], [-k2, k2]]),
                                   ["a", "b"])
    A_aug = passive_statespace(plant, [Damper(("a", "b"), c, ks)])[0]
    # states x1, x2, v1, v2, F (force in the element, tension positive when b − a stretches)
    A = np.zeros((5, 5))
    A[0, 2] = A[1, 3] = 1.0
    A[2, :2] = [-(k1 + k2) / m1, k2 / m1]
    A[3, :2] = [k2 / m2, -k2 / m2]
    A[2, 4], A[3, 4] = 1.0 / m1, -1.0 / m2  # tension pulls a towards b and b towards a
    A[4, 2:4] = [-ks, ks]
    A[4, 4] = -ks / c
    same_poles(np.linalg.eigvals(A_aug), np.linalg.eigvals(A), 1e-11)


def test_frf_with_an_absorber_matches_the_dynamic_stiffness_and_python_control():
    a = Absorber(1, "x", 0.1, 29.0, 0.11)
    m, k, c = a.mass_kg, a.stiffness_n_per_m, a.damping_n_s_per_m
    plant = primary()
    freq = np.geomspace(5.0, 200.0, 41)
    frf = passive_frf(plant, [a], freq, ["push"], ["xo"])
    w = 2 * np.pi * freq
    # (K − ω² M + j ω C)⁻¹ of the 2-DOF model, entry (primary, primary)
    Km = np.array([[K + k, -k], [-k, k]])
    Cm = np.array([[CP + c, -c], [-c, c]])
    expected = np.array(
        [np.linalg.inv(Km - wk**2 * np.diag([M, m]) + 1j * wk * Cm)[0, 0] for wk in w]
    )
    assert np.allclose(frf.closed[0, 0], expected, rtol=1e-10)
    # the augmented state space through python-control gives the same response
    sys = control.ss(*passive_statespace(plant, [a], ["push"], ["xo"]))
    resp = sys.frequency_response(w)
    assert np.allclose(np.asarray(resp.complex).ravel(), expected, rtol=1e-9)
    # the load (stroke) against the lumped model's x_a − x
    stroke = np.array(
        [(lambda x: x[1, 0] - x[0, 0])(np.linalg.inv(Km - wk**2 * np.diag([M, m]) + 1j * wk * Cm))
         for wk in w]
    )
    assert np.allclose(frf.effort[0, 0], stroke, rtol=1e-9)


def test_sweep_reuses_the_ports_for_new_values():
    plant = primary()
    freq = np.geomspace(20.0, 60.0, 50)
    first = [Absorber(1, "x", 0.1, 29.0, 0.11)]
    sweep = PassiveSweep(plant, first, freq, ["push"], ["xo"])
    other = [Absorber(1, "x", 0.1, 31.0, 0.05)]
    direct = passive_frf(plant, other, freq, ["push"], ["xo"]).closed
    assert np.allclose(sweep.closed(other), direct)
    model = passive_model(plant, first)
    assert np.allclose(
        passive_statespace(plant, with_parts(model, plant, other))[0],
        passive_statespace(plant, other)[0],
    )
    with pytest.raises(DesignError, match="one for one"):
        with_parts(model, plant, other * 2)


def test_tuned_mode_shows_the_less_damped_of_its_two_poles():
    plant = primary()
    a = Absorber(1, "x", 0.1, 28.0, 0.03)  # lightly damped absorber: the two poles differ
    modes = passive_modes(plant, [a])
    poles = np.linalg.eigvals(passive_statespace(plant, [a])[0])
    upper = poles[poles.imag > 0]
    zetas = -upper.real / np.abs(upper)
    assert modes.matched.damping[0] == pytest.approx(np.min(zetas), rel=1e-12)
    assert modes.part_poles[0] is not None
    assert len(modes.matched.other_poles) == 1


def test_names_never_clash_with_the_plant():
    plant = primary()
    plant = ModalPlant(modes=plant.modes, sites={**plant.sites, "~part1.port": [0.5]},
                       outputs=[Output("~part1.y", "displacement", site="x")])
    model = passive_model(plant, [Damper(("x", "g"), 10.0)])
    assert "~part1.y" not in model.ports.sensors
    assert model.plant.sites["~part1.port"][0] == 0.5  # the plant's own site is kept


def test_not_a_piezo_strut():
    plant = primary()
    with pytest.raises(DesignError, match="not a piezoelectric strut"):
        piezo_constants(Actuator("s", "strut", between=("g", "x"), stiffness_n_per_m=1.0))
    with pytest.raises(DesignError, match="no passive parts"):
        passive_model(plant, [])


def test_a_damper_on_one_of_two_repeated_modes_is_credited_to_that_mode():
    # two modes at exactly 100.0 Hz; a viscous damper from site a to the ground moves only
    # mode 1's direction (site a does not move in mode 2). Mode 2 keeps its open-loop pole.
    # Reference: the eigenvectors of the same augmented state matrix from numpy, projected on
    # each mode's states.
    plant = ModalPlant(modes=(Mode(100.0, 0.01), Mode(100.0, 0.01)),
                       sites={"a": np.array([1.0, 0.0]), "b": np.array([0.0, 1.0])})
    for site, seen in (("a", 0), ("b", 1)):
        modes = passive_modes(plant, [Damper(between=(site, "ground"),
                                             coefficient_n_s_per_m=40.0)])
        damping = modes.matched.damping
        assert damping[1 - seen] == pytest.approx(0.01, rel=1e-6)
        z = 0.01 + 40.0 / (2 * 2 * np.pi * 100.0)  # c/(2 m ω) added to the seen mode (m = 1)
        assert damping[seen] == pytest.approx(z, rel=1e-6)
