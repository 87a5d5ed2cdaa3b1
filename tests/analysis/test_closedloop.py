"""Closed-loop poles, Padé delay, roll-offs, mode matching: vs closed forms and python-control."""

import control
import numpy as np
import pytest

from dampctl.analysis.closedloop import (
    closed_loop_matrix,
    closed_loop_modes,
    lag_elements,
    match_modes,
    modal_damping,
    open_loop_poles,
    pade_matrices,
    plant_loop_delay_s,
    sampling_delay_s,
    series_matrices,
)
from dampctl.design import Branch, Design, Loop
from dampctl.model.components import Actuator, Mode, Pair, Requirements, Sensor
from dampctl.model.plant import ModalPlant
from dampctl.testing import sdof_plant


def dvf(plant, pair: str, gain: float) -> Design:
    p = plant.pair(pair)
    return Design(
        law="dvf",
        plant_fingerprint=plant.fingerprint,
        actuators=(p.actuator,),
        sensors=(p.sensor,),
        target_modes=(1,),
        loops=(
            Loop(
                pair=pair, actuator=p.actuator, sensor=p.sensor, gain=gain, branches=(Branch(gain),)
            ),
        ),
        pairs=(pair,),
    )


def test_sdof_direct_velocity_feedback():
    # Balas, J. Guidance and Control 2(3), 1979 (from memory): m ẍ + (c+g) ẋ + k x = 0; m = 2, k =
    # 8e4, c = 8, g = 72 gives poles −20 ± 198.997487j and ζ = 0.01 + 72/(2·2·200) = 0.1.
    plant = sdof_plant(2.0, 8e4, 8.0)
    modes = closed_loop_modes(plant, dvf(plant, "fv", 72.0), delay_s=0.0, roll_off=False)
    assert modes.poles[0] == pytest.approx(-20 + 198.997487j, abs=1e-6)
    assert modes.damping[0] == pytest.approx(0.1, rel=1e-12)
    assert modes.stable
    roots = np.roots([2.0, 8.0 + 72.0, 8e4])
    assert modes.poles[0] == pytest.approx(roots[roots.imag > 0][0], rel=1e-12)
    assert modes.other_poles.size == 0


def test_closed_loop_matrix_matches_python_control_feedback():
    # python-control feedback() of the plant and the controller (negative feedback) has the
    # same poles as our closed-loop state matrix, here with a dynamic MIMO controller and a
    # plant feedthrough (acceleration sensor).
    plant = sdof_plant(1.5, 3e4, 5.0)
    mats = plant.statespace_matrices(["f"], ["v", "a"])
    ctrl = (
        np.array([[-300.0]]),
        np.array([[1.0, 0.2]]),
        np.array([[50.0]]),
        np.array([[10.0, 0.01]]),
    )
    ours = np.linalg.eigvals(closed_loop_matrix(mats, ctrl))
    loop = control.feedback(control.ss(*mats), control.ss(*ctrl))
    np.testing.assert_allclose(np.sort_complex(ours), np.sort_complex(loop.poles()), rtol=1e-10)


@pytest.mark.parametrize("order", [1, 2, 3, 5])
def test_pade_matches_python_control(order):
    # python-control pade(T, n) gives the [n/n] Padé approximant of e^{−sT} as coefficients
    delay = 1.3e-4
    num, den = control.pade(delay, order)
    A, B, C, D = pade_matrices(delay, order)
    f = np.geomspace(10.0, 2e4, 60)
    s = 2j * np.pi * f
    ours = np.array([(C @ np.linalg.solve(si * np.eye(order) - A, B) + D)[0, 0] for si in s])
    np.testing.assert_allclose(ours, np.polyval(num, s) / np.polyval(den, s), rtol=1e-9)
    # all-pass, and close to the exact delay well below 1/T
    np.testing.assert_allclose(np.abs(ours), 1.0, rtol=1e-9)
    low = f < 0.05 / delay
    tol = 5e-3 if order == 1 else 1e-4
    np.testing.assert_allclose(ours[low], np.exp(-s[low] * delay), atol=tol)


def test_lag_elements_response():
    # effective controller R_a e^{-sT} K R_s: its response is the product of the parts
    K = (np.zeros((0, 0)), np.zeros((0, 1)), np.zeros((1, 0)), np.array([[3.0]]))
    eff = lag_elements(
        K, delay_s=1e-4, actuator_bandwidth_hz=[2000.0], sensor_bandwidth_hz=[5000.0], pade_order=3
    )
    A, B, C, D = eff
    num, den = control.pade(1e-4, 3)
    for f in (10.0, 300.0, 1500.0):
        s = 2j * np.pi * f
        ours = (C @ np.linalg.solve(s * np.eye(A.shape[0]) - A, B) + D)[0, 0]
        ref = 3.0 * np.polyval(num, s) / np.polyval(den, s)
        ref /= (1 + s / (2 * np.pi * 2000.0)) * (1 + s / (2 * np.pi * 5000.0))
        assert ours == pytest.approx(ref, rel=1e-9)


def test_series_matrices_order():
    first = (np.array([[-1.0]]), np.array([[1.0]]), np.array([[2.0]]), np.array([[0.0]]))
    second = (np.zeros((0, 0)), np.zeros((0, 1)), np.zeros((1, 0)), np.array([[5.0]]))
    A, B, C, D = series_matrices(first, second)
    # 5 · 2/(s+1): DC gain 10
    assert (D - C @ np.linalg.solve(A, B))[0, 0] == pytest.approx(10.0)


def test_sampling_delay():
    # ZOH lags ωT/2 and one sample of computation ωT: 1.5 T (Franklin, Powell & Workman,
    # Digital Control of Dynamic Systems, 1998, from memory)
    assert sampling_delay_s(20000.0) == pytest.approx(7.5e-5, rel=1e-15)
    assert sampling_delay_s(None) == 0.0
    plant = ModalPlant(
        modes=[Mode(10.0, 0.01)],
        sites={"a": [1.0]},
        requirements=Requirements(sample_rate_hz=10000.0, loop_delay_s=2e-5),
    )
    assert plant_loop_delay_s(plant) == pytest.approx(1.7e-4, rel=1e-12)


def test_modal_damping_and_open_loop_poles():
    poles = open_loop_poles(np.array([100.0, 5.0]), np.array([0.02, 0.5]))
    omega, zeta = modal_damping(poles)
    np.testing.assert_allclose(omega, [100.0, 5.0], rtol=1e-14)
    np.testing.assert_allclose(zeta, [0.02, 0.5], rtol=1e-13)
    _, zeta = modal_damping(np.array([-3.0 + 0j, 0.1 + 1j, 0j]))
    assert zeta[0] == 1.0 and zeta[1] < 0 and zeta[2] == 1.0


def test_match_modes_keeps_identity_of_near_repeated_modes():
    # Two modes 0.1 % apart; the loop sees only the first. Assignment must give the damped
    # pole to mode 1 and leave mode 2 where it was, whatever order eig returns them in.
    plant = ModalPlant(
        modes=[Mode(100.0, 0.005), Mode(100.1, 0.005)],
        sites={"a": [1.0, 0.0]},
        actuators=[Actuator(name="f", kind="force", site="a")],
        sensors=[Sensor(name="v", kind="velocity", site="a")],
        pairs=[Pair(name="p", actuator="f", sensor="v")],
    )
    gain = 2 * 0.05 * plant.omegas[0]  # Δζ = g φ²/(2ω) = 0.05 (Balas 1979)
    modes = closed_loop_modes(plant, dvf(plant, "p", gain), delay_s=0.0, roll_off=False)
    assert modes.damping[0] == pytest.approx(0.055, rel=1e-9)
    assert modes.damping[1] == pytest.approx(0.005, rel=1e-9)
    assert modes.freq_hz[1] == pytest.approx(100.1, rel=1e-12)
    # shuffled input gives the same assignment
    open_poles = open_loop_poles(plant.omegas, plant.dampings)
    closed = np.concatenate([modes.poles, modes.poles.conj()])[::-1]
    again = match_modes(open_poles, closed)
    np.testing.assert_array_equal(again.poles, modes.poles)


def test_delay_and_roll_off_reduce_added_damping():
    plant = sdof_plant(2.0, 8e4, 8.0)
    design = dvf(plant, "fv", 72.0)
    ideal = closed_loop_modes(plant, design, delay_s=0.0, roll_off=False)
    late = closed_loop_modes(plant, design, delay_s=1e-3, roll_off=False)
    # a delay T rotates the velocity feedback by ωT: added damping ≈ Δζ cos(ωT) (first order)
    assert late.damping[0] < ideal.damping[0]
    added = (late.damping[0] - 0.01) / (ideal.damping[0] - 0.01)
    assert added == pytest.approx(np.cos(200.0 * 1e-3), rel=0.05)
    assert late.other_poles.size > 0


# ---------------------------------------------------------------------- repeated frequencies
def _twin_plant(sees=(1.0, 0.0)):
    """Two modes at exactly 100.0 Hz with orthogonal shapes; one pair at site 'a' whose shape
    values are ``sees`` (1, 0: it sees mode 1's direction only)."""
    return ModalPlant(
        modes=(Mode(100.0, 0.01), Mode(100.0, 0.01), Mode(260.0, 0.01)),
        sites={"a": np.array([sees[0], sees[1], 0.4]), "b": np.array([0.0, 1.0, 0.3])},
        actuators=(Actuator("fa", "force", site="a"),),
        sensors=(Sensor("va", "velocity", site="a"),),
        pairs=(Pair("pa", "fa", "va"),),
        requirements=Requirements(modes=(2,), min_damping=0.05),
    )


def _dvf_on_a(plant, gain=60.0, targets=(2,)):
    return Design(law="dvf", plant_fingerprint=plant.fingerprint, actuators=("fa",),
                  sensors=("va",), target_modes=targets,
                  loops=(Loop("pa", "fa", "va", gain, branches=(Branch(gain),)),))


def test_a_loop_that_sees_one_of_two_repeated_modes_is_not_credited_to_the_other():
    from dampctl.analysis.modetable import closed_loop_table

    plant = _twin_plant()
    design = _dvf_on_a(plant)
    table = closed_loop_table(plant, design, delay_s=0.0, roll_off=False)
    # mode 2's direction is not seen by any pair: it keeps its open-loop pole exactly
    assert table.rows[1].closed_damping == pytest.approx(0.01, rel=1e-6)
    assert table.rows[0].closed_damping > 0.03
    assert table.target_min_damping() < 0.05  # the target on mode 2 is not met
    # against python-control: the closed-loop eigenvectors of the same loop, projected on the
    # modal subspace of the cluster (states [ω q, q'] of modes 1 and 2)
    A, B, C, D = plant.statespace_matrices(["fa"], ["va"])
    loop = control.feedback(control.ss(A, B, C, D), control.ss([], [], [], [[60.0]]))
    values, vectors = np.linalg.eig(loop.A)
    near = [k for k, p in enumerate(values) if p.imag > 0 and abs(abs(p) / (2 * np.pi) - 100) < 20]
    assert len(near) == 2
    for k in near:
        share = [np.sum(np.abs(vectors[2 * m : 2 * m + 2, k]) ** 2) for m in (0, 1)]
        mode = int(np.argmax(share))
        assert max(share) / sum(share) > 0.99
        zeta = -values[k].real / abs(values[k])
        assert table.rows[mode].closed_damping == pytest.approx(zeta, rel=1e-9)


def test_the_order_of_the_repeated_modes_does_not_matter():
    from dampctl.analysis.modetable import closed_loop_table

    plant = _twin_plant(sees=(0.0, 1.0))  # the pair sees mode 2 only now
    table = closed_loop_table(plant, _dvf_on_a(plant, targets=(1,)), delay_s=0.0,
                              roll_off=False)
    assert table.rows[0].closed_damping == pytest.approx(0.01, rel=1e-6)
    assert table.rows[1].closed_damping > 0.03
    assert table.target_min_damping() == pytest.approx(0.01, rel=1e-6)


def test_repeated_clusters():
    from dampctl.analysis.closedloop import open_loop_poles, repeated_clusters

    w = 2 * np.pi * np.array([100.0, 50.0, 100.0, 100.0 * (1 + 1e-6), 50.0])
    poles = open_loop_poles(w, np.full(5, 0.01))
    assert repeated_clusters(poles) == [[1, 4], [0, 2]]
