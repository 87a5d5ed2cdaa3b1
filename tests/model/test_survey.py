"""Plant survey: participation (HSV), clusters and their rank, unseen modes, dominant modes."""

import control
import numpy as np
import pytest

from dampctl.model.components import Actuator, Disturbance, Mode, Output, Pair, Sensor
from dampctl.model.plant import ModalPlant
from dampctl.model.survey import (
    cluster_rank,
    find_clusters,
    pair_rows,
    pair_visibility,
    survey_plant,
)


def one_mode(freq_hz: float, zeta: float, b: float, c: float, kind: str) -> ModalPlant:
    return ModalPlant(
        modes=[Mode(freq_hz=freq_hz, damping=zeta)],
        sites={"a": [b], "s": [c]},
        actuators=[Actuator(name="f", kind="force", site="a")],
        sensors=[Sensor(name="y", kind=kind, site="s")],
        pairs=[Pair(name="p", actuator="f", sensor="y")],
    )


@pytest.mark.parametrize("kind", ["velocity", "displacement", "acceleration"])
def test_hsv_approximation_against_slycot(kind):
    # W. K. Gawronski, Dynamics and Control of Structures: A Modal Approach (1998), balanced modal
    # gramians (from memory): γ ≈ |b||c̃|/(4ζω) for a lightly damped mode, c̃ the output row on the
    # balanced states. (Gawronski, Dynamics and Control of Structures, 1998): ω = 2π·50, ζ = 0.01
    # gives 1/(4ζω) = 0.0795775 exactly for the velocity output; approximation error ≈ ζ otherwise.
    # Reference: Hankel singular values from python-control hsvd (slycot ab13ad).
    zeta = 0.01
    plant = one_mode(50.0, zeta, 0.8, 1.5, kind)
    ours = survey_plant(plant).pairs[0].hsv[0]
    sys = plant.statespace(["f"], ["y"])
    if kind == "acceleration":  # HSVs do not see the feedthrough D
        sys = control.ss(sys.A, sys.B, sys.C, 0 * sys.D)
    hsv = np.asarray(control.hsvd(sys))
    assert ours == pytest.approx(np.sqrt(hsv[0] * hsv[1]), rel=2 * zeta)
    assert hsv.max() == pytest.approx(ours, rel=2 * zeta)
    if kind == "displacement":
        # Gawronski 1998 approximation, values from slycot: 0.8·1.5/(s² + 2ζωs + ω²) has HSVs
        # 3.0702e-4 and 3.0094e-4, and the
        # approximation b·c/(4ζω²) = 3.0396e-4
        np.testing.assert_allclose(np.sort(hsv)[::-1], [3.0702e-4, 3.0094e-4], atol=1e-8)
        assert ours == pytest.approx(3.0396e-4, abs=1e-8)
    if kind == "velocity":
        omega = 2 * np.pi * 50.0
        assert ours == pytest.approx(0.8 * 1.5 / (4 * zeta * omega), rel=1e-12)
        np.testing.assert_allclose(hsv, ours, rtol=1e-9)


def test_participation_shares_per_kind():
    rng = np.random.default_rng(7)
    n = 4
    plant = ModalPlant(
        modes=[Mode(freq_hz=f, damping=0.01) for f in (40.0, 90.0, 200.0, 410.0)],
        sites={k: rng.normal(size=n) for k in "abc"},
        actuators=[Actuator(name=f"f{k}", kind="force", site=k) for k in "abc"],
        sensors=[Sensor(name=f"v{k}", kind="velocity", site=k) for k in "abc"]
        + [Sensor(name="xa", kind="displacement", site="a")],
        pairs=[Pair(name=f"p{k}", actuator=f"f{k}", sensor=f"v{k}") for k in "abc"]
        + [Pair(name="qa", actuator="fa", sensor="xa")],
    )
    survey = survey_plant(plant)
    shares = np.array([p.participation for p in survey.pairs])
    np.testing.assert_allclose(shares[:3].sum(axis=0), 1.0, rtol=1e-12)
    np.testing.assert_allclose(shares[3], 1.0, rtol=1e-12)  # the only force/displacement pair
    # share = γ_ip / Σ_q γ_iq with γ_ip ∝ φ_i(p)² for collocated velocity pairs (Gawronski 1998)
    phi2 = np.array([plant.sites[k] ** 2 for k in "abc"])
    np.testing.assert_allclose(shares[:3], phi2 / phi2.sum(axis=0), rtol=1e-12)
    assert all(p.collocated for p in survey.pairs)
    assert [p.description for p in survey.pairs] == ["force/velocity"] * 3 + ["force/displacement"]


def test_collocation_flag():
    plant = ModalPlant(
        modes=[Mode(freq_hz=f, damping=0.01) for f in (10.0, 30.0)],
        sites={"a": [1.0, 0.5], "b": [0.4, -0.9], "c": [0.2, 0.3]},
        actuators=[
            Actuator(name="f", kind="force", site="a"),
            Actuator(name="s", kind="strut", between=("b", "c"), stiffness_n_per_m=1e5),
        ],
        sensors=[
            Sensor(name="xa", kind="displacement", site="a"),
            Sensor(name="vb", kind="velocity", site="b"),
            Sensor(name="F", kind="force", actuator="s"),
        ],
        pairs=[
            Pair(name="col", actuator="f", sensor="xa"),
            Pair(name="non", actuator="f", sensor="vb"),
            Pair(name="iff", actuator="s", sensor="F"),
        ],
    )
    survey = survey_plant(plant)
    assert [p.collocated for p in survey.pairs] == [True, False, True]
    assert any("pair non is not collocated" in w for w in survey.warnings)


def test_find_clusters_chains_neighbours():
    freqs = np.array([300.0, 100.0, 101.5, 150.0, 306.0, 312.0, 500.0])
    # 300-306-312 chain by neighbours, but 312 is 4 % above 300: cut there
    assert find_clusters(freqs, 0.02) == [[1, 2], [0, 4]]
    assert find_clusters(freqs, 0.05) == [[1, 2], [0, 4, 5]]
    assert find_clusters(freqs, 0.001) == []
    assert find_clusters(np.array([50.0]), 0.02) == []


def symmetric_plant(pairs):
    # x/y modes of a symmetric structure, 0.5 % apart, and a third mode far away
    return ModalPlant(
        modes=[Mode(freq_hz=f, damping=0.005) for f in (200.0, 201.0, 600.0)],
        sites={"x": [1.0, 0.0, 0.3], "y": [0.0, 1.0, 0.3], "xy": [0.7, 0.7, 0.0]},
        actuators=[Actuator(name=f"f{k}", kind="force", site=k) for k in ("x", "y", "xy")],
        sensors=[Sensor(name=f"v{k}", kind="velocity", site=k) for k in ("x", "y", "xy")],
        pairs=[Pair(name=k, actuator=f"f{k}", sensor=f"v{k}") for k in pairs],
    )


def test_cluster_rank_pbh():
    # M. L. J. Hautus (1969) / PBH test (Kailath, Linear Systems, 1980; from memory): damping k
    # modes at (nearly) one frequency independently needs inputs spanning them: rank k.
    one = survey_plant(symmetric_plant(["xy"]))
    assert [c.modes for c in one.clusters] == [(1, 2)]
    assert one.clusters[0].pairs_needed == 2
    assert one.clusters[0].rank == 1
    assert any("span only 1" in w for w in one.warnings)
    two = survey_plant(symmetric_plant(["x", "xy"]))
    assert two.clusters[0].rank == 2
    assert not any("span only" in w for w in two.warnings)
    b, c = pair_rows(symmetric_plant(["x", "y"]), ["x", "y"])
    assert cluster_rank(b, c, [0, 1]) == 2
    assert cluster_rank(b[:1], c[:1], [0, 1]) == 1


def test_unseen_mode_flag():
    plant = symmetric_plant(["x"])  # site x has no motion in mode 2
    survey = survey_plant(plant)
    assert survey.unseen_modes == (2,)
    assert any("no pair sees mode(s) 2" in w for w in survey.warnings)
    assert survey_plant(symmetric_plant(["x", "y"])).unseen_modes == ()


def test_dominant_mode_shares_against_integrated_psd():
    # Mean square of a mode under white force PSD S (one-sided, N²/Hz):
    # σ² = S (b c)² ∫ df / |ω_i² − ω² + 2jζω_iω|² = S (b c)² / (8 ζ ω_i³) (S. H. Crandall and
    # W. D. Mark, Random Vibration in Mechanical Systems, 1963; from memory). Reference here:
    # the exact output PSD of the plant integrated numerically.
    plant = ModalPlant(
        modes=[Mode(freq_hz=f, damping=z) for f, z in ((20.0, 0.01), (75.0, 0.02), (260.0, 0.01))],
        sites={"d": [1.0, 0.8, 0.6], "o": [1.0, -1.2, 2.0]},
        outputs=[Output(name="o", kind="displacement", site="o")],
        disturbances=[Disturbance(name="w", site="d", psd=2e-3)],
    )
    survey = survey_plant(plant, dominant_share=0.0)
    shares = dict(survey.dominant_modes["o"])
    f = np.concatenate(
        [np.linspace(0.0, 2000.0, 400_001)]
        + [m.freq_hz + np.linspace(-3, 3, 20001) for m in plant.modes]
    )
    f = np.unique(f)
    per_mode = []
    for k in range(3):
        single = ModalPlant(
            modes=[plant.modes[k]],
            sites={"d": [plant.sites["d"][k]], "o": [plant.sites["o"][k]]},
            outputs=plant.outputs,
            disturbances=plant.disturbances,
        )
        h = single.frf(f, ["w"], ["o"])[0, 0]
        per_mode.append(np.trapezoid(np.abs(h) ** 2 * 2e-3, f))
    per_mode = np.array(per_mode)
    expected = per_mode / per_mode.sum()
    for k in range(3):
        assert shares[k + 1] == pytest.approx(expected[k], rel=2e-3)
    listed = survey_plant(plant).dominant_modes["o"]
    assert [m for m, s in listed] == [k + 1 for k in np.argsort(-expected) if expected[k] >= 0.1]


def test_no_pairs_warns():
    plant = ModalPlant(modes=[Mode(freq_hz=10.0, damping=0.01)], sites={"a": [1.0]})
    survey = survey_plant(plant)
    assert survey.pairs == ()
    assert survey.unseen_modes == (1,)
    assert any("no candidate pairs" in w for w in survey.warnings)


def test_a_long_chain_of_near_repeated_modes_is_split():
    # 40 modes each 1.5 % above the last: every neighbour is within 2 %, the chain spans 78x;
    # each cluster spans at most 2 % (two modes: 1.5 %; three would span 3 %)
    freqs = 100.0 * 1.015 ** np.arange(40)
    clusters = find_clusters(freqs, 0.02)
    assert clusters == [[k, k + 1] for k in range(0, 40, 2)]
    for group in clusters:
        assert freqs[group[-1]] <= 1.02 * freqs[group[0]]


def test_visibility_is_scale_free_across_six_decades():
    # modes at 0.1 Hz, 100 Hz and 100 kHz, each seen alike by one velocity/force pair (shape
    # value 1 at the pair's site, modal mass 1 kg). The modal HSV γ = |b||c|/(4ζω) spans six
    # decades (1/ω), so comparing with the pair's strongest mode called the 100 kHz mode
    # unseen; the mode's own term against the others' at its frequency (the pole-zero
    # spacing) sees every mode.
    freqs = (0.1, 100.0, 1e5)
    plant = ModalPlant(
        modes=[Mode(freq_hz=f, damping=0.01) for f in freqs],
        sites={"a": [1.0, 1.0, 1.0], "n": [0.0, 2.0, 0.5]},
        actuators=[Actuator(name="f", kind="force", site="a")],
        sensors=[Sensor(name="v", kind="velocity", site="a")],
        pairs=[Pair(name="p", actuator="f", sensor="v")],
    )
    survey = survey_plant(plant)
    assert survey.unseen_modes == ()
    hsv = survey.pairs[0].hsv
    assert hsv[2] / hsv[0] == pytest.approx(1e-6, rel=1e-9)  # γ ∝ 1/ω: six decades
    # mode 3: own term r/ω3², the two modes below give -r/ω3² each: spacing 1/2
    np.testing.assert_allclose(pair_visibility(plant, ["p"])[0], [1.0, 1.0, 0.5], rtol=1e-5)
    # a site at a node of mode 2 only does not see mode 2, whatever the other modes do
    node = ModalPlant(
        modes=plant.modes, sites={"a": [1.0, 1e-5, 1.0], "n": [0.0, 2.0, 0.5]},
        actuators=plant.actuators, sensors=plant.sensors, pairs=plant.pairs,
    )
    assert survey_plant(node).unseen_modes == (2,)


def test_visibility_is_the_pole_zero_spacing_of_the_loop():
    # A collocated loop moves a mode's pole toward the zero beside it; the visibility is the
    # relative spacing (ω² − z²)/ω² to first order. Reference: the transmission zeros of the
    # same plant computed by python-control (slycot ab08nd) from its state space.
    plant = ModalPlant(
        modes=[Mode(freq_hz=f, damping=1e-6) for f in (10.0, 12.0, 40.0)],
        sites={"a": [1.0, 0.05, 0.7]},
        actuators=[Actuator(name="f", kind="force", site="a")],
        sensors=[Sensor(name="x", kind="displacement", site="a")],
        pairs=[Pair(name="p", actuator="f", sensor="x")],
    )
    A, B, C, D = plant.statespace_matrices(["f"], ["x"])
    zeros = np.abs(control.ss(A, B, C, D).zeros())
    w2 = plant.omegas[1]
    z2 = zeros[np.argmin(np.abs(zeros - w2))]
    spacing = (w2**2 - z2**2) / w2**2
    got = pair_visibility(plant, ["p"])[0, 1]
    assert got == pytest.approx(abs(spacing), rel=0.02)
    assert got < 0.01  # the small residue on mode 2: pole and zero nearly cancel
