"""Bring your own controller: ``design_from_statespace``, ``tune --law custom``, ``closed_loop``.

Outside truths: the same velocity feedback written by hand as a python-control ``StateSpace``
must give the closed-loop poles of dampctl's own DVF design to 1e-9 (and the DVF SDOF closed
form of Balas, J. Guidance and Control 2(3), 1979, from memory); ``closed_loop`` must equal
python-control ``feedback`` of the plant and controller built by hand; a PPF filter past its
static bound (Fanson & Caughey, AIAA J. 28(4), 1990, from memory: unstable when the DC loop gain
exceeds 1) must be reported unstable; scipy's bilinear ``cont2discrete`` inverts the discrete
controller's continuous equivalent.
"""

from __future__ import annotations

import io
import json
import math

import control
import numpy as np
import pytest
import scipy.signal
from repo import PLANTS, ROOT

import dampctl
from dampctl.analysis.closedloop import closed_loop_modes
from dampctl.commands.cli import main
from dampctl.discrete.export import export_design
from dampctl.errors import DesignError, UsageError
from dampctl.laws import dvf
from dampctl.laws.custom import controller_from_file, design_from_statespace
from dampctl.testing import chain_plant

OSC = PLANTS / "oscillator.toml"


@pytest.fixture(scope="module")
def oscillator():
    return dampctl.load_plant(OSC)


def _hand_dvf(g: float, corner_hz: float):
    """u = −K v with K(s) = g ω_r/(s + ω_r): velocity feedback with a first-order roll-off."""
    wr = 2 * math.pi * corner_hz
    return control.ss([[-wr]], [[wr]], [[g]], [[0.0]])


def _run(argv):
    out, err = io.StringIO(), io.StringIO()
    code = main(argv, stdout=out, stderr=err)
    return code, out.getvalue(), err.getvalue()


def test_hand_written_velocity_feedback_equals_the_dvf_law(oscillator):
    g = 72.0
    law = dvf.design(oscillator, ["coil_vel"], gain=[g])
    corner = law.info["roll_off_hz"]
    mine = design_from_statespace(oscillator, _hand_dvf(g, corner), ["coil"], ["vel"])
    assert mine.law == "custom" and mine.target_modes == (1,)
    # closed-loop poles with the plant's delay (Padé) and roll-offs, as every analysis sees them
    a, b = closed_loop_modes(oscillator, law), closed_loop_modes(oscillator, mine)
    np.testing.assert_allclose(np.sort_complex(a.poles), np.sort_complex(b.poles), rtol=1e-9)
    np.testing.assert_allclose(a.damping, b.damping, rtol=1e-9)
    # without delay and roll-off the mode's damping is close to ζ + g/(2 m ω_n) (Balas 1979);
    # the roll-off at 159 Hz lowers it a little
    ideal = closed_loop_modes(oscillator, mine, delay_s=0.0, roll_off=False)
    assert 0.09 < ideal.damping[0] < 0.01 + 72 / (2 * 2 * 200)
    # the same exported controller: equal discrete responses and the same section pole
    rate = 10_000.0
    e_law, e_mine = export_design(oscillator, law, rate), export_design(oscillator, mine, rate)
    z = np.exp(2j * np.pi * np.array([5.0, 31.8, 159.0, 1000.0, 4000.0]) / rate)
    for zk in z:
        k_law = control.ss(*e_law.controller.state_space, 1 / rate)(zk)
        k_mine = control.ss(*e_mine.controller.state_space, 1 / rate)(zk)
        np.testing.assert_allclose(k_mine, k_law, rtol=1e-9)
    law_pole = e_law.realisations[0].form.branches[0].sos[0, 4]
    mine_pole = e_mine.realisations[0].form.branches[-1].sos[0, 4]
    assert mine_pole == pytest.approx(law_pole, rel=1e-9)
    assert e_mine.verification.stable


def test_closed_loop_equals_python_control_feedback_on_a_mimo_case():
    plant = chain_plant([1.0, 0.5, 0.8], [4e5, 2e5, 3e5], damping=0.01)
    rng = np.random.default_rng(3)
    A = np.array([[-300.0, 900.0], [-900.0, -300.0]])
    K = (A, rng.normal(size=(2, 2)), 50 * rng.normal(size=(2, 2)), np.diag([20.0, 35.0]))
    design = design_from_statespace(plant, K, ["f1", "f3"], ["v1", "v3"], name="invented")
    cl = dampctl.closed_loop(plant, design, inputs=["f2"], outputs=["x2"], delay_s=0.0,
                             roll_off=False)
    assert cl.input_labels == ["f2", "v1_noise", "v3_noise"]
    assert cl.output_labels == ["x2", "f1", "f3"]
    # by hand: plant from [u; w] to [y; z], negative feedback u = −K y on the first channels
    G = plant.statespace(["f1", "f3", "f2"], ["v1", "v3", "x2"])
    # feedback(G, K_full) with K acting from the sensor outputs to the actuator inputs only
    K_full = control.ss(K[0], np.hstack([K[1], np.zeros((2, 1))]),
                        np.vstack([K[2], np.zeros((1, 2))]),
                        np.block([[K[3], np.zeros((2, 1))], [np.zeros((1, 3))]]))
    closed = control.feedback(G, K_full, sign=-1)
    for f in (10.0, 95.0, 140.0, 333.0, 2000.0):
        s = 2j * math.pi * f
        want = closed(s)[2, 2]  # f2 -> x2
        got = cl(s)[0, 0]
        assert got == pytest.approx(want, rel=1e-9)


def test_unstable_custom_controller_is_reported_unstable(tmp_path, oscillator):
    # PPF on the displacement gauge, u = +g_p ω_f²/(s² + 2ζ_f ω_f s + ω_f²) x: stable only while
    # g_p G(0) < 1 (Fanson & Caughey 1990); G(0) = 1/k = 1.25e-5 m/N, so g_p = 2/G(0) is not
    wf, zf = 2 * math.pi * 32.0, 0.2
    gp = 2.0 / 1.25e-5
    K = control.ss([[0.0, 1.0], [-(wf**2), -2 * zf * wf]], [[0.0], [wf**2]], [[-gp, 0.0]], [[0]])
    np.savez(tmp_path / "k.npz", A=K.A, B=K.B, C=K.C, D=K.D)
    code, out, err = _run(["tune", str(OSC), "--law", "custom", "--controller",
                           str(tmp_path / "k.npz"), "--actuators", "coil", "--sensors", "gap",
                           "-o", str(tmp_path / "d.json")])
    assert code == 1, err
    assert "stable: NO" in out or "UNSTABLE" in out + err
    code, out, err = _run(["assess", str(OSC), str(tmp_path / "d.json")])
    assert code == 1 and "UNSTABLE" in out


def test_discrete_controller_at_its_own_rate_only(tmp_path, oscillator):
    rate = 10_000.0
    wr, g = 2 * math.pi * 159.15, 100.0  # damping about 0.12 > the plant's 0.1
    mats = tuple(np.array(m) for m in ([[-wr]], [[wr]], [[g]], [[0.0]]))
    Ad, Bd, Cd, Dd, _ = scipy.signal.cont2discrete(mats, 1 / rate,
                                                   method="bilinear")
    (tmp_path / "k.json").write_text(json.dumps(
        {"A": Ad.tolist(), "B": Bd.tolist(), "C": Cd.tolist(), "D": Dd.tolist(), "dt": 1 / rate}
    ))
    code, out, err = _run(["tune", str(OSC), "--law", "custom", "--controller",
                           str(tmp_path / "k.json"), "--pairs", "coil_vel",
                           "-o", str(tmp_path / "d.json"), "--json"])
    assert code == 0, err
    design = dampctl.load_design(tmp_path / "d.json")
    assert design.controller_rate_hz == rate
    # the continuous equivalent is the controller whose Tustin image is the given one
    A, B, C, D = design.statespace_matrices()
    back = scipy.signal.cont2discrete((A, B, C, D), 1 / rate, method="bilinear")
    for x, y in zip(back[:4], (Ad, Bd, Cd, Dd), strict=True):
        np.testing.assert_allclose(x, y, rtol=1e-12, atol=1e-15)
    code, out, err = _run(["assess", str(OSC), str(tmp_path / "d.json")])
    assert code in (0, 1) and "STABLE" in out, err
    code, out, err = _run(["export", str(OSC), str(tmp_path / "d.json"), "--rate", "10000",
                           "-o", str(tmp_path / "x"), "--json"])
    assert code == 0, err
    exported = json.loads((tmp_path / "x" / "controller.json").read_text())
    np.testing.assert_array_equal(exported["state_space"]["A"], Ad)  # used as given
    code, _, err = _run(["export", str(OSC), str(tmp_path / "d.json"), "--rate", "20000",
                         "-o", str(tmp_path / "y")])
    assert code == 2 and "runs at that rate only" in err and "--rate 10000" in err
    assert not (tmp_path / "y").exists()


def test_bad_controllers_are_named(tmp_path, oscillator):
    with pytest.raises(UsageError, match="B has 2 columns, expected 1 sensors"):
        design_from_statespace(oscillator, (np.eye(2) * -1, np.ones((2, 2)), np.ones((1, 2)),
                                            np.zeros((1, 2))), ["coil"], ["vel"])
    with pytest.raises(UsageError, match="unknown sensor"):
        design_from_statespace(oscillator, _hand_dvf(1.0, 100.0), ["coil"], ["nope"])
    with pytest.raises(UsageError, match="not finite"):
        design_from_statespace(oscillator, ([[np.nan]], [[1.0]], [[1.0]], [[0.0]]), ["coil"],
                               ["vel"])
    np.savez(tmp_path / "k.npz", A=-np.eye(1), B=np.ones((1, 1)), C=np.ones((1, 1)))
    with pytest.raises(DesignError, match=r"k\.npz: D: missing array"):
        controller_from_file(tmp_path / "k.npz")
    (tmp_path / "k.json").write_text('{"A": [[-1]], "B": [[1, 1, 1]], "C": [[1]], "D": [[0]]}')
    code, _, err = _run(["tune", str(OSC), "--law", "custom", "--controller",
                         str(tmp_path / "k.json"), "--actuators", "coil", "--sensors", "vel",
                         "-o", str(tmp_path / "d.json")])
    assert code == 2 and err.count("\n") == 1
    assert "k.json" in err and "B has 3 columns, expected 1 sensors" in err
    assert not (tmp_path / "d.json").exists()


def test_signal_names_are_identifiers_interconnect_can_address(oscillator):
    assert dampctl.signal_name("probe x") == "probe_x"
    assert dampctl.signal_name("2nd(gauge)") == "_2nd_gauge_"
    law = dvf.design(oscillator, ["coil_vel"], gain=[72.0])
    K = law.statespace()
    assert K.name == "dvf_controller" and K.input_labels == ["vel"]
    negK = law.statespace(negate=True)
    assert negK.output_labels == ["coil"]
    np.testing.assert_allclose(negK(10j), -K(10j))


def _readme_block(title: str) -> str:
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    start = text.index(f"<!-- {title} -->")
    body = text[start:].split("```python\n", 1)[1].split("```", 1)[0]
    return body


def test_readme_interconnect_example_runs_and_agrees(monkeypatch):
    monkeypatch.chdir(ROOT)
    scope: dict = {}
    exec(compile(_readme_block("interconnect example"), "README.md", "exec"), scope)
    by_hand, ours = scope["by_hand"], scope["ours"]
    for f in (50.0, 223.0, 462.0, 1700.0):
        s = 2j * math.pi * f
        np.testing.assert_allclose(by_hand(s), ours(s), rtol=1e-9, atol=1e-18)
