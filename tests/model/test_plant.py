"""ModalPlant against the outside: closed forms, lumped models solved directly, python-control."""

import control
import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st
from scipy.linalg import eigh

from dampctl.errors import PlantError
from dampctl.model.components import Actuator, Mode, Pair, Sensor
from dampctl.model.modalbasis import compiled_available
from dampctl.model.plant import ModalPlant
from dampctl.testing import chain_matrices, chain_plant, sdof_plant

# --------------------------------------------------------------------------- SDOF closed forms
# S. S. Rao, Mechanical Vibrations (6th ed., 2017), free damped and harmonically excited
# vibration (from memory); worked values m = 2 kg, k = 8e4 N/m, c = 8 N·s/m computed in
# (Rao, Mechanical Vibrations, 6th ed. 2017, from memory).
M_KG, K_N_M, C_NS_M = 2.0, 8.0e4, 8.0


@pytest.fixture(scope="module")
def sdof():
    return sdof_plant(M_KG, K_N_M, C_NS_M)


def test_sdof_natural_frequency_and_damping(sdof):
    # ω_n = √(k/m) = 200 rad/s, ζ = c/(2√(km)) = 0.01 (Rao 2017, free damped vibration)
    assert sdof.omegas[0] == pytest.approx(np.sqrt(K_N_M / M_KG), rel=1e-12)
    assert sdof.omegas[0] == pytest.approx(200.0, rel=1e-12)
    assert sdof.dampings[0] == pytest.approx(C_NS_M / (2 * np.sqrt(K_N_M * M_KG)), rel=1e-12)
    assert sdof.freqs_hz[0] == pytest.approx(31.830989, rel=1e-7)


def test_sdof_static_compliance(sdof):
    # X/F at ω = 0 is 1/k = 1.25e-5 m/N (Rao 2017, harmonically excited vibration)
    h = sdof.frf([0.0], ["f"], ["x"])
    assert h[0, 0, 0] == pytest.approx(1.0 / K_N_M, rel=1e-12)


def test_sdof_resonance_peak_and_q(sdof):
    # Peak of k·|X/F| at ω_r = ω_n√(1−2ζ²) is 1/(2ζ√(1−ζ²)) = 50.0025; Q = 1/(2ζ) = 50 (Rao 2017)
    wn, z = 200.0, 0.01
    w_r = wn * np.sqrt(1 - 2 * z**2)
    h = sdof.frf(np.array([w_r, w_r * (1 - 1e-4), w_r * (1 + 1e-4)]) / (2 * np.pi), ["f"], ["x"])
    amp = K_N_M * np.abs(h[0, 0])
    assert amp[0] == pytest.approx(1 / (2 * z * np.sqrt(1 - z**2)), rel=1e-12)
    assert amp[0] == pytest.approx(50.0025, rel=1e-6)
    assert amp[0] > amp[1] and amp[0] > amp[2]
    # exact half-power points ω² = ω_n²(1 − 2ζ² ∓ 2ζ√(1−ζ²)): |H| = peak/√2 there
    for sign in (-1.0, 1.0):
        w_half = wn * np.sqrt(1 - 2 * z**2 + sign * 2 * z * np.sqrt(1 - z**2))
        value = K_N_M * abs(sdof.frf([w_half / (2 * np.pi)], ["f"], ["x"])[0, 0, 0])
        assert value == pytest.approx(amp[0] / np.sqrt(2), rel=1e-9)


def test_sdof_velocity_and_acceleration(sdof):
    # v = jω x and a = −ω² x for harmonic motion
    f = np.array([3.0, 31.0, 400.0])
    w = 2 * np.pi * f
    h = sdof.frf(f, ["f"], ["x", "v", "a"])
    np.testing.assert_allclose(h[1, 0], 1j * w * h[0, 0], rtol=1e-12)
    np.testing.assert_allclose(h[2, 0], -(w**2) * h[0, 0], rtol=1e-12)
    # high-frequency acceleration tends to 1/m (mass line)
    assert sdof.frf([1e6], ["f"], ["a"])[0, 0, 0].real == pytest.approx(1 / M_KG, rel=1e-6)


# --------------------------------------------------------------------------- 3-DOF chain M, K of a
# computed example for Miu, ASME J. Dyn. Syst. Meas. Control 113(3), 1991: M = diag(1, 2, 1.5) kg, K
# = [[3e4, −1e4, 0], [−1e4, 3e4, −2e4], [0, −2e4, 2e4]] N/m = chain k = (2e4, 1e4, 2e4).
CHAIN_M = [1.0, 2.0, 1.5]
CHAIN_K = [2e4, 1e4, 2e4]


def test_chain_matrices_match_reference():
    M, K = chain_matrices(CHAIN_M, CHAIN_K)
    np.testing.assert_array_equal(K, [[3e4, -1e4, 0.0], [-1e4, 3e4, -2e4], [0.0, -2e4, 2e4]])
    np.testing.assert_array_equal(M, np.diag(CHAIN_M))


def test_chain_poles_reference_values():
    # eigh: poles 41.6541, 150.3634, 184.3614 rad/s (printed to 4 decimals)
    plant = chain_plant(CHAIN_M, CHAIN_K)
    np.testing.assert_allclose(plant.omegas, [41.6541, 150.3634, 184.3614], atol=5e-5)


def test_chain_frf_matches_direct_solve_with_rayleigh_damping():
    # Proportional (Rayleigh) damping C = αM + βK keeps the modes real (Rayleigh, Theory of
    # Sound, 1877; standard result). The modal plant must give the dynamic compliance
    # (K − ω²M + jωC)⁻¹ solved directly at every frequency, and jω, −ω² times it.
    M, K = chain_matrices(CHAIN_M, CHAIN_K)
    C = 0.4 * M + 2e-5 * K
    plant = chain_plant(CHAIN_M, CHAIN_K, damping=C)
    w_modes = np.sqrt(eigh(K, M, eigvals_only=True))
    np.testing.assert_allclose(plant.omegas, w_modes, rtol=1e-12)
    np.testing.assert_allclose(plant.dampings, (0.4 / w_modes + 2e-5 * w_modes) / 2, rtol=1e-10)
    f = np.concatenate([[0.0, 1.0], plant.freqs_hz, plant.freqs_hz * 1.01, [50.0, 500.0]])
    ins, outs = ["f1", "f3"], ["x1", "x2", "v3", "a1", "a2"]
    h = plant.frf(f, ins, outs)
    for k, freq in enumerate(f):
        w = 2 * np.pi * freq
        H = np.linalg.inv(K - w**2 * M + 1j * w * C)
        dofs_in = [0, 2]
        expected = np.array(
            [
                H[0, dofs_in],
                H[1, dofs_in],
                1j * w * H[2, dofs_in],
                -(w**2) * H[0, dofs_in],
                -(w**2) * H[1, dofs_in],
            ]
        )
        np.testing.assert_allclose(h[:, :, k], expected, rtol=1e-9, atol=1e-15)


def test_non_proportional_damping_is_refused():
    C = np.diag([5.0, 0.0, 0.0])
    with pytest.raises(PlantError, match="not proportional"):
        chain_plant(CHAIN_M, CHAIN_K, damping=C)


# --------------------------------------------------------------------------- strut physics
# 2-DOF example (Preumont, Vibration Control of Active Structures, 2011,
# integral force feedback; from memory): m1 = m2 = 1, flexure k_p = 1 (ground–m1), strut
# k_a = 0.2 (ground–m1), k2 = 1 (m1–m2). Poles 0.658642, 1.663187; zeros (strut removed)
# 0.618034, 1.618034.
def strut_plant():
    M = np.eye(2)
    k_a = 0.2
    K_star = np.array([[2.0, -1.0], [-1.0, 1.0]])
    b = np.array([1.0, 0.0])  # strut extension = x1 − ground
    K = K_star + k_a * np.outer(b, b)
    base = ModalPlant.from_lumped(M, K, ["m1", "m2"], damping=0.0)
    sites = dict(base.sites)
    sites["ground"] = np.zeros(2)
    plant = ModalPlant(
        modes=base.modes,
        sites=sites,
        actuators=[
            Actuator(name="s", kind="strut", between=("ground", "m1"), stiffness_n_per_m=k_a),
            Actuator(name="f2", kind="force", site="m2"),
        ],
        sensors=[
            Sensor(name="F", kind="force", actuator="s"),
            Sensor(name="x2", kind="displacement", site="m2"),
            Sensor(name="ext", kind="relative_displacement", between=("ground", "m1")),
        ],
        pairs=[Pair(name="iff", actuator="s", sensor="F")],
    )
    return plant, M, K, K_star, b, k_a


def test_strut_and_force_sensor_match_lumped_model():
    # Lumped model with the strut element: (K − ω²M) x = k_a b δ + f, F = k_a (bᵀx − δ).
    plant, M, K, _, b, k_a = strut_plant()
    np.testing.assert_allclose(plant.omegas, [0.658642, 1.663187], rtol=1e-6)
    f = np.array([0.0, 0.03, 0.2, 0.3, 1.0]) / (2 * np.pi)  # 0 to 1 rad/s
    h = plant.frf(f, ["s", "f2"], ["F", "x2", "ext"])
    for k, freq in enumerate(f):
        w = 2 * np.pi * freq
        H = np.linalg.inv(K - w**2 * M)
        x_delta = H @ (k_a * b)  # per unit δ
        x_force = H[:, 1]  # per unit force at m2
        np.testing.assert_allclose(h[0, 0, k], k_a * (b @ x_delta - 1.0), rtol=1e-10)
        np.testing.assert_allclose(h[0, 1, k], k_a * (b @ x_force), rtol=1e-10)
        np.testing.assert_allclose(h[1, 0, k], x_delta[1], rtol=1e-10)
        np.testing.assert_allclose(h[2, 1, k], b @ x_force, rtol=1e-10)


def test_strut_force_zeros_are_frequencies_without_strut():
    # IFF zeros = natural frequencies of the structure with the strut removed (Preumont 2011,
    # from memory; values computed with eigh): 0.618034 and 1.618034 rad/s (golden ratio).
    plant, M, _, K_star, _, _ = strut_plant()
    zeros = np.asarray(plant.statespace(["s"], ["F"]).zeros())
    assert np.max(np.abs(zeros.real)) < 1e-9
    found = np.sort(np.abs(zeros.imag[zeros.imag > 0]))
    np.testing.assert_allclose(found, np.sqrt(eigh(K_star, M, eigvals_only=True)), rtol=1e-9)
    np.testing.assert_allclose(found, [0.618034, 1.618034], rtol=1e-6)


# --------------------------------------------------------------------------- residual flexibility
def truncated(plant: ModalPlant, keep: int, pairs=()) -> ModalPlant:
    return ModalPlant(
        modes=plant.modes[:keep],
        sites={k: v[:keep] for k, v in plant.sites.items()},
        actuators=plant.actuators,
        sensors=plant.sensors,
        pairs=pairs,
    )


def test_static_gain_sets_dc_gain_and_improves_low_frequency_fit():
    # The static (residual-flexibility) correction (Craig & Kurdila, Fundamentals of Structural
    # Dynamics, 2006, mode-acceleration method; from memory): with the measured static gain of
    # a pair, the truncated plant's DC gain equals it, and its low-frequency response is closer
    # to the full model's than without the correction.
    full = chain_plant(CHAIN_M, CHAIN_K, damping=0.01)
    _, K = chain_matrices(CHAIN_M, CHAIN_K)
    static = np.linalg.inv(K)[0, 0]
    plain = truncated(full, 1)
    corrected = truncated(
        full, 1, pairs=[Pair(name="q1", actuator="f1", sensor="x1", static_gain=static)]
    )
    assert corrected.frf([0.0], ["f1"], ["x1"])[0, 0, 0] == pytest.approx(static, rel=1e-12)
    A, B, C, D = corrected.statespace_matrices(["f1"], ["x1"])
    assert (D - C @ np.linalg.solve(A, B))[0, 0] == pytest.approx(static, rel=1e-12)
    f = np.array([0.5, 2.0, 5.0])
    ref = full.frf(f, ["f1"], ["x1"])
    err_plain = np.abs(plain.frf(f, ["f1"], ["x1"]) - ref)
    err_corr = np.abs(corrected.frf(f, ["f1"], ["x1"]) - ref)
    assert np.all(err_corr < 0.05 * err_plain)


def test_static_gain_on_velocity_sensor_is_refused():
    plant = chain_plant([1.0], [1e4])
    with pytest.raises(PlantError, match=r"pairs\[1\]\.static_gain"):
        ModalPlant(
            modes=plant.modes,
            sites=plant.sites,
            actuators=plant.actuators,
            sensors=plant.sensors,
            pairs=[Pair(name="p", actuator="f1", sensor="v1", static_gain=1.0)],
        )


# --------------------------------------------------------------------------- python-control
def random_plant(seed: int) -> ModalPlant:
    rng = np.random.default_rng(seed)
    n = int(rng.integers(3, 12))
    freqs = np.sort(np.exp(rng.uniform(np.log(5.0), np.log(3000.0), n)))
    modes = [
        Mode(
            freq_hz=f,
            damping=float(rng.uniform(0.001, 0.05)),
            modal_mass_kg=float(rng.uniform(0.2, 5.0)),
        )
        for f in freqs
    ]
    sites = {name: rng.normal(size=n) for name in ("a", "b", "c", "d")}
    actuators = [
        Actuator(name="fa", kind="force", site="a"),
        Actuator(name="sbc", kind="strut", between=("b", "c"), stiffness_n_per_m=3e4),
    ]
    sensors = [
        Sensor(name="xa", kind="displacement", site="a"),
        Sensor(name="vd", kind="velocity", site="d"),
        Sensor(name="ab", kind="acceleration", site="b"),
        Sensor(name="rcd", kind="relative_displacement", between=("c", "d")),
        Sensor(name="rvab", kind="relative_velocity", between=("a", "b")),
        Sensor(name="F", kind="force", actuator="sbc"),
    ]
    pairs = [
        Pair(
            name="q",
            actuator="fa",
            sensor="xa",
            static_gain=float(rng.uniform(1, 2))
            * float(
                np.sum(
                    sites["a"] ** 2
                    / (
                        np.array([m.omega for m in modes]) ** 2
                        * np.array([m.modal_mass_kg for m in modes])
                    )
                )
            ),
        )
    ]
    return ModalPlant(modes=modes, sites=sites, actuators=actuators, sensors=sensors, pairs=pairs)


ENGINES = [
    "numpy",
    pytest.param(
        "compiled",
        marks=pytest.mark.skipif(not compiled_available(), reason="numba is not installed"),
    ),
]


@pytest.mark.parametrize("engine", ENGINES)
@pytest.mark.parametrize("seed", [1, 2, 3, 4])
def test_frf_agrees_with_python_control(seed, engine):
    # python-control 0.10.2 frequency_response of the plant's own state space (a generic
    # per-frequency evaluation of C (sI − A)⁻¹ B + D) must agree with the modal sum, with the
    # modal basis from either engine (dampctl.model.modalbasis).
    plant = random_plant(seed)
    ins = ["fa", "sbc"]
    outs = ["xa", "vd", "ab", "rcd", "rvab", "F"]
    f = np.sort(np.concatenate([np.geomspace(0.5, 2e4, 1300), plant.freqs_hz]))
    ours = plant.frf(f, ins, outs, engine=engine)
    ref = control.frequency_response(plant.statespace(ins, outs), 2 * np.pi * f).complex
    ref = np.asarray(ref).reshape(ours.shape)
    rel = np.abs(ours - ref) / np.maximum(np.abs(ref), 1e-300)
    assert np.max(rel) < 1e-9


def test_statespace_is_balanced_modal_form_with_names():
    plant = chain_plant(CHAIN_M, CHAIN_K, damping=0.02)
    sys = plant.statespace(["f1"], ["x1", "v2"])
    assert sys.input_labels == ["f1"]
    assert sys.output_labels == ["x1", "v2"]
    assert sys.state_labels[:2] == ["wq1", "dq1"]
    w, z = plant.omegas[0], plant.dampings[0]
    np.testing.assert_allclose(sys.A[:2, :2], [[0, w], [-w, -2 * z * w]], rtol=1e-14)
    # the poles are −ζω ± jω√(1−ζ²)
    np.testing.assert_allclose(
        np.sort(np.abs(sys.poles())), np.sort(np.repeat(plant.omegas, 2)), rtol=1e-12
    )


# --------------------------------------------------------------------------- pole-zero alternation
def test_collocated_zeros_reference_example():
    # computed example for Miu 1991: zeros of the collocated pair at each dof
    plant = chain_plant(CHAIN_M, CHAIN_K)
    expected = {1: [50.8884, 160.4484], 2: [115.4701, 173.2051], 3: [110.4185, 181.1291]}
    for dof, zeros_ref in expected.items():
        zeros = np.asarray(plant.statespace([f"f{dof}"], [f"x{dof}"]).zeros())
        found = np.sort(np.abs(zeros.imag[zeros.imag > 0]))
        np.testing.assert_allclose(found, zeros_ref, atol=5e-5)
    # non-collocated force at 1 / displacement at 3: no finite zeros
    assert np.asarray(plant.statespace(["f1"], ["x3"]).zeros()).size == 0


@given(
    n=st.integers(min_value=2, max_value=6),
    seed=st.integers(min_value=0, max_value=10_000),
)
def test_collocated_poles_and_zeros_alternate(n, seed):
    # D. K. Miu, "Physical interpretation of transfer function zeros for simple control
    # systems with mechanical flexibilities", ASME J. Dyn. Syst. Meas. Control 113, 1991: for an
    # undamped structure with a collocated force/displacement pair, ω_1 < z_1 < ω_2 < ... < ω_n.
    rng = np.random.default_rng(seed)
    freqs = np.cumprod(np.concatenate([[rng.uniform(5, 50)], rng.uniform(1.1, 3.0, n - 1)]))
    shape = rng.uniform(0.2, 1.0, n) * rng.choice([-1.0, 1.0], n)
    plant = ModalPlant(
        modes=[Mode(freq_hz=f, damping=0.0) for f in freqs],
        sites={"p": shape},
        actuators=[Actuator(name="f", kind="force", site="p")],
        sensors=[Sensor(name="x", kind="displacement", site="p")],
    )
    zeros = np.asarray(plant.statespace(["f"], ["x"]).zeros())
    scale = plant.omegas.max()
    assert np.max(np.abs(zeros.real)) < 1e-6 * scale
    z = np.sort(np.abs(zeros.imag[zeros.imag > 0]))
    assert z.size == n - 1
    w = plant.omegas
    assert np.all(w[:-1] < z) and np.all(z < w[1:])


# --------------------------------------------------------------------------- validation in code
def test_shape_row_wrong_length():
    with pytest.raises(PlantError, match=r"sites\.a: has 1 values but the plant has 2 modes"):
        ModalPlant(modes=[Mode(10.0, 0.01), Mode(20.0, 0.01)], sites={"a": [1.0]})


def test_unknown_input_and_output_names():
    plant = chain_plant([1.0], [1e4])
    with pytest.raises(PlantError, match="unknown input 'nope'"):
        plant.frf([1.0], ["nope"], ["x1"])
    with pytest.raises(PlantError, match="unknown output 'nope'"):
        plant.frf([1.0], ["f1"], ["nope"])
    with pytest.raises(PlantError, match="freq_hz"):
        plant.frf([-1.0], ["f1"], ["x1"])


# ---------------------------------------------------------------------- the fingerprint
def _oscillator():
    from repo import PLANTS

    from dampctl.model.plantfile import load_plant

    return load_plant(PLANTS / "oscillator.toml")


def _edit(plant, **changes):
    """A copy of the plant with one thing changed (``modes``, ``actuators``... or a field of
    the requirements given as ``requirements=dict(...)``)."""
    from dataclasses import replace

    req = changes.pop("requirements", None)
    if req is not None:
        changes["requirements"] = replace(plant.requirements, **req)
    return replace(plant, **changes)


def test_fingerprint_leaves_out_cost_noise_and_limits():
    from dataclasses import replace

    plant = _oscillator()
    act, (vel, gap) = plant.actuators[0], plant.sensors
    for other in (
        _edit(plant, actuators=(replace(act, cost=1.0),)),
        _edit(plant, actuators=(replace(act, max_force_n=3.0),)),
        _edit(plant, actuators=(replace(act, max_stroke_m=1e-3),)),
        _edit(plant, sensors=(replace(vel, noise_density=5e-6), gap)),
        _edit(plant, sensors=(vel, replace(gap, cost=7.0))),
        _edit(plant, requirements={"min_damping": 0.3, "min_gain_margin_db": 3.0}),
        _edit(plant, title="renamed"),
    ):
        assert other.fingerprint == plant.fingerprint


def test_fingerprint_covers_what_the_design_depends_on():
    from dataclasses import replace

    plant = _oscillator()
    mode, act, (vel, gap) = plant.modes[0], plant.actuators[0], plant.sensors
    edits = {
        "freq_hz": _edit(plant, modes=(replace(mode, freq_hz=35.0),)),
        "damping": _edit(plant, modes=(replace(mode, damping=0.02),)),
        "modal_mass_kg": _edit(plant, modes=(replace(mode, modal_mass_kg=3.0),)),
        "shape": _edit(plant, sites={"mass": np.array([0.9])}),
        "actuator bandwidth": _edit(plant, actuators=(replace(act, bandwidth_hz=4000.0),)),
        "sensor bandwidth": _edit(plant, sensors=(replace(vel, bandwidth_hz=900.0), gap)),
        "sensor kind": _edit(plant, sensors=(replace(vel, kind="acceleration"), gap)),
        "pair": _edit(plant, pairs=(replace(plant.pairs[0], sensor="gap"), plant.pairs[1])),
        "loop delay": _edit(plant, requirements={"loop_delay_s": 2e-4}),
        "sample rate": _edit(plant, requirements={"sample_rate_hz": 8000.0}),
    }
    prints = {name: p.fingerprint for name, p in edits.items()}
    assert plant.fingerprint not in prints.values(), prints
    assert len(set(prints.values())) == len(prints)


def test_summary_names_what_changed():
    from dataclasses import replace

    from dampctl.model.summary import plant_summary, summary_differences

    plant = _oscillator()
    other = _edit(plant, modes=(replace(plant.modes[0], freq_hz=35.0),),
                  requirements={"sample_rate_hz": 8000.0})
    assert summary_differences(plant_summary(plant), plant_summary(plant)) == []
    assert summary_differences(plant_summary(plant), plant_summary(other)) == [
        "mode 1 freq_hz 31.831 → 35", "sample_rate_hz 10000 → 8000"]
