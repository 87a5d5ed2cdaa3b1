"""``dampctl tune`` in-process: each law, refusals, file output, JSON keys, exit codes."""

import io
import json

import numpy as np
import pytest
from lawplants import cluster_plant, strut_plant
from repo import ROOT

from dampctl.analysis.closedloop import closed_loop_modes
from dampctl.commands import tune
from dampctl.commands._common import SAFETY_LINES
from dampctl.commands.cli import main
from dampctl.design import load_design
from dampctl.model.components import Requirements
from dampctl.model.plantfile import dump_plant, load_plant
from dampctl.testing import chain_plant


def _run(*argv):
    out, err = io.StringIO(), io.StringIO()
    code = main(["tune", *map(str, argv)], stdout=out, stderr=err)
    return code, out.getvalue(), err.getvalue()


@pytest.fixture
def strut_file(tmp_path):
    plant = strut_plant(
        damping=0.002, requirements=Requirements(min_damping=0.01, sample_rate_hz=20.0)
    )
    path = tmp_path / "strut.toml"
    path.write_text(dump_plant(plant))
    return path


@pytest.fixture
def chain_file(tmp_path):
    path = tmp_path / "chain.toml"
    path.write_text(dump_plant(chain_plant([1.0] * 4, [1e4] * 4, damping=0.005)))
    return path


REQUIRED = {
    "law",
    "pairs",
    "loops",
    "stable",
    "modes",
    "controller_poles",
    "design_file",
    "warnings",
}


@pytest.mark.parametrize(
    ("law", "pairs", "extra"),
    [("dvf", "dvf1", []), ("iff", "iff1", ["--leak-hz", "0.005"]), ("ppf", "ppf1", [])],
)
def test_each_law_writes_a_design_and_json(strut_file, tmp_path, law, pairs, extra):
    target = tmp_path / f"{law}.json"
    code, out, err = _run(
        strut_file, "--law", law, "--pairs", pairs, "-o", target, "--json", *extra
    )
    assert code == 0, err
    payload = json.loads(out)
    assert REQUIRED <= payload.keys()
    assert payload["law"] == law and payload["pairs"] == [pairs]
    assert payload["loops"][0]["pair"] == pairs and "gain" in payload["loops"][0]
    assert payload["stable"] is True and payload["target_met"] is True
    assert payload["design_file"] == str(target)
    assert payload["delay_s"] == pytest.approx(1.5 / 20.0)
    assert "loop delay" in payload["note"]
    # the design file reads back and belongs to the plant
    plant = load_plant(strut_file)
    design = load_design(target)
    design.check_plant(plant)
    assert design.law == law
    # modes are those of closed_loop_modes with the plant's delay (assignment, not sort)
    matched = closed_loop_modes(plant, design)
    np.testing.assert_allclose(
        [m["closed_damping"] for m in payload["modes"]], matched.damping, rtol=1e-12
    )
    assert [m["mode"] for m in payload["modes"]] == [1, 2]
    assert {"mode", "open_freq_hz", "open_damping", "closed_freq_hz", "closed_damping"} <= (
        payload["modes"][0].keys()
    )
    assert len(payload["controller_poles"]) == matched.other_poles.size
    if law == "iff":
        assert payload["info"]["leak_hz"] == 0.005
        assert len(payload["info"]["achievable"]) == 2


def test_human_output_has_table_target_and_safety(chain_file, tmp_path):
    code, out, _ = _run(
        chain_file,
        "--law",
        "dvf",
        "--pairs",
        "p1,p4",
        "--modes",
        "1,2",
        "--target-damping",
        "0.05",
        "-o",
        tmp_path / "d.json",
    )
    assert code == 0
    assert "closed damping" in out and "open (Hz)" in out
    assert "target: damping >= 0.05 on mode(s) 1, 2: met" in out
    for line in SAFETY_LINES:
        assert line in out


def test_target_not_met_exits_one(strut_file, tmp_path):
    code, out, _ = _run(
        strut_file,
        "--law",
        "iff",
        "--pairs",
        "iff1",
        "--target-damping",
        "0.5",
        "-o",
        tmp_path / "d.json",
    )
    assert code == 1
    assert "NOT met" in out and "not reached" in out


def test_ppf_gain_above_static_limit_is_reported_unstable(strut_file, tmp_path):
    code, out, _ = _run(
        strut_file,
        "--law",
        "ppf",
        "--pairs",
        "ppf1",
        "--modes",
        "1",
        "--gain",
        "1.2",
        "-o",
        tmp_path / "d.json",
        "--json",
    )
    payload = json.loads(out)
    assert code == 1
    assert payload["stable"] is False and payload["info"]["static_stability"] is False
    assert any("static stability condition broken" in w for w in payload["warnings"])


def test_refusals_point_to_the_right_law(strut_file, tmp_path):
    target = tmp_path / "d.json"
    for law, pair in (("dvf", "cross"), ("ppf", "crossx")):
        code, _, err = _run(strut_file, "--law", law, "--pairs", pair, "-o", target)
        assert code == 2 and "--law lqg" in err and "not collocated" in err
    code, _, err = _run(strut_file, "--law", "iff", "--pairs", "fv2", "-o", target)
    assert code == 2 and "strut with its own force sensor" in err
    assert not target.exists()


def test_refuses_to_write_over_the_plant(strut_file):
    before = strut_file.read_text()
    code, _, err = _run(strut_file, "--law", "iff", "--pairs", "iff1", "-o", strut_file)
    assert code == 2 and "refusing to write over the input" in err
    assert strut_file.read_text() == before


@pytest.mark.parametrize(
    ("argv", "message"),
    [
        (["--law", "dvf", "--pairs", "dvf1", "--leak-hz", "1"], "--leak-hz applies"),
        (["--law", "dvf", "--pairs", "dvf1", "--gain", "x"], "--gain: expected numbers"),
        (["--law", "dvf"], "needs --pairs"),
        (["--law", "dvf", "--pairs", "dvf1", "--order", "4"], "--order applies"),
        (["--law", "dvf", "--pairs", "dvf1", "--modes", "7"], "mode 7 does not exist"),
        (["--law", "dvf", "--pairs", "nope"], "unknown pair 'nope'"),
    ],
)
def test_bad_options(strut_file, tmp_path, argv, message):
    code, _, err = _run(strut_file, *argv, "-o", tmp_path / "d.json")
    assert code == 2 and message in err


def test_one_two_four_pairs(chain_file, tmp_path):
    seen = []
    for pairs in ("p1", "p1,p4", "p1,p2,p3,p4"):
        code, out, _ = _run(
            chain_file, "--law", "dvf", "--pairs", pairs, "--json", "-o", tmp_path / "d.json",
            "--force",
        )
        payload = json.loads(out)
        assert code == 0 and len(payload["loops"]) == len(pairs.split(","))
        seen.append(payload["min_damping"])
    assert seen[0] <= seen[1] + 1e-9 <= seen[2] + 2e-9


def test_cluster_shortfall_is_printed(tmp_path):
    path = tmp_path / "cluster.toml"
    path.write_text(dump_plant(cluster_plant()))
    code, out, _ = _run(
        path, "--law", "dvf", "--pairs", "pc", "--modes", "1,2", "-o", tmp_path / "d.json"
    )
    assert code == 0
    assert "modes 1, 2 cannot all be damped" in out


def test_lqg_missing_module_is_a_clear_error(strut_file, tmp_path, monkeypatch):
    import importlib.util

    real = importlib.util.find_spec
    monkeypatch.setattr(
        importlib.util,
        "find_spec",
        lambda name, *a: None if name == "dampctl.laws.lqg" else real(name, *a),
    )
    code, _, err = _run(strut_file, "--law", "lqg", "--pairs", "fv2", "-o", tmp_path / "d.json")
    assert code == 2 and "dampctl.laws.lqg" in err


def test_lqg_gets_actuators_and_sensors_from_pairs(strut_file, tmp_path, monkeypatch):
    calls = {}

    class FakeLqg:
        @staticmethod
        def design(plant, actuators, sensors, *, modes=None, target_damping=None, order=None):
            calls.update(actuators=actuators, sensors=sensors, order=order, modes=modes)
            from dampctl.laws import dvf

            return dvf.design(plant, ["fv2"], gain=1.0)

    monkeypatch.setattr(tune, "_lqg", lambda: FakeLqg)
    code, _, err = _run(
        strut_file,
        "--law",
        "lqg",
        "--pairs",
        "fv2",
        "--order",
        "4",
        "--modes",
        "2",
        "-o",
        tmp_path / "d.json",
    )
    assert code in (0, 1), err
    assert calls == {"actuators": ["f2"], "sensors": ["v2"], "order": 4, "modes": [2]}


def test_lqg_human_output_names_hardware_and_design_model(chain_file, tmp_path):
    code, out, err = _run(
        chain_file, "--law", "lqg", "--actuators", "f1", "--sensors", "v1", "--modes", "1",
        "--target-damping", "0.02", "-o", tmp_path / "d.json",
    )  # fmt: skip
    assert code in (0, 1), err
    assert "lqg on actuator(s) f1 from sensor(s) v1" in out and "(-)" not in out
    assert "LQG design model: modes" in out and "estimator damping" in out


def test_target_none_maximizes_even_when_the_plant_states_one(strut_file, tmp_path):
    # strut_file states min_damping 0.01; 'none' asks for the largest smallest damping instead
    code, out, err = _run(strut_file, "--law", "dvf", "--pairs", "dvf1", "--target-damping",
                          "none", "-o", tmp_path / "d.json", "--json")  # fmt: skip
    assert code == 0, err
    payload = json.loads(out)
    assert payload["target_damping"] is None and payload["info"]["tuning"].startswith("maximize")
    code, _, err = _run(strut_file, "--law", "dvf", "--pairs", "dvf1", "--target-damping",
                        "lots", "-o", tmp_path / "e.json")  # fmt: skip
    assert code == 2 and "'none'" in err


def test_lqg_human_output_names_modes_added_for_spillover(tmp_path):
    # demo truss, two struts: residual modes 7 and 9 spill over on the default design model
    # and are added to it (tests/laws/test_spillover.py)
    truss = ROOT / "plants" / "light_truss.toml"
    out_file = tmp_path / "d.json"
    code, out, err = _run(truss, "--law", "lqg", "--pairs", "iff_1,iff_2", "-o", out_file)
    assert code == 0, err
    assert "(targets 1, 2, 3; neighbours 4; added for spillover 7, 9)" in out
    assert "stable: yes" in out


# ---------------------------------------------------------------------- passive laws
@pytest.fixture
def piezo_file(tmp_path):
    from dataclasses import replace

    from dampctl.model.components import Disturbance, Output

    base = strut_plant(damping=0.002, requirements=Requirements(modes=(1, 2), min_damping=0.01,
                                                                  min_gain_margin_db=6.0))
    struts = tuple(replace(a, capacitance_f=1e-6, coupling_k=0.5) if a.kind == "strut" else a
                   for a in base.actuators)
    plant = replace(base, actuators=struts, outputs=(Output("x2o", "displacement", site="m2"),),
                    disturbances=(Disturbance("w2", "m2", 1.0),))
    path = tmp_path / "piezo.toml"
    path.write_text(dump_plant(plant))
    return path


def test_tune_tmd_viscous_shunt(piezo_file, tmp_path):
    runs = {
        "tmd": ["--law", "tmd", "--modes", "1,2", "--site", "m2", "--mass-ratio", "0.03"],
        "viscous": ["--law", "viscous", "--modes", "1,2", "--between", "ground,m1",
                    "--between", "m1,m2", "--mount-stiffness", "0.5"],
        "shunt": ["--law", "shunt", "--modes", "1", "--pairs", "iff1", "--shunt", "R"],
    }
    for law, argv in runs.items():
        out = tmp_path / f"{law}.json"
        code, text, err = _run(piezo_file, *argv, "-o", out, "--json")
        assert code in (0, 1), err
        payload = json.loads(text)
        assert payload["passive"] is True and payload["loops"] == []
        assert payload["law"] == law and payload["parts"][0]["part"] in ("absorber", "damper",
                                                                           "shunt")
        design = load_design(out)
        assert design.passive and design.law == law
        code, human, _ = _run(piezo_file, *argv, "-o", tmp_path / f"{law}2.json")
        assert "no loop" in human and "tuning:" in human
    info = load_design(tmp_path / "shunt.json").info
    assert set(info["shunts"][0]) == {"pair", "kind", "resistance_ohm", "mode"}
    assert info["coupling"][0]["coupling"] > 0
    _, human, _ = _run(piezo_file, *runs["tmd"], "-o", tmp_path / "tmd3.json")
    assert "Caution: passive parts carry real loads" in human
    assert SAFETY_LINES[0] not in human


@pytest.mark.parametrize(
    ("argv", "message"),
    [
        (["--law", "dvf", "--pairs", "dvf1", "--mass-ratio", "0.1"], "--mass-ratio applies to"),
        (["--law", "tmd", "--modes", "1", "--gain", "3"], "--gain does not apply"),
        (["--law", "tmd", "--modes", "1", "--pairs", "dvf1"], "--pairs does not apply"),
        (["--law", "viscous", "--modes", "1"], "needs --between"),
        (["--law", "viscous", "--modes", "1", "--between", "m1"], "two site names"),
        (["--law", "shunt", "--modes", "1"], "needs --pairs"),
        (["--law", "shunt", "--modes", "1", "--pairs", "fv2"], "not a piezoelectric strut"),
        (["--law", "tmd", "--modes", "1", "--mass-ratio", "x"], "expected numbers"),
        (["--law", "tmd", "--modes", "1", "--shunt", "R"], "--shunt applies to"),
    ],
)
def test_passive_usage_errors(piezo_file, tmp_path, argv, message):
    out = tmp_path / "d.json"
    code, text, err = _run(piezo_file, *argv, "-o", out)
    assert code == 2, (text, err)
    assert message in err and not out.exists()


def test_shunt_design_prints_the_piezo_caution(piezo_file, tmp_path):
    from dampctl.commands._common import SHUNT_LINES

    code, human, err = _run(piezo_file, "--law", "shunt", "--modes", "1", "--pairs", "iff1",
                            "-o", tmp_path / "s.json")
    assert code in (0, 1), err
    assert SHUNT_LINES[0] in human and SAFETY_LINES[0] not in human


def test_a_sample_rate_below_twice_a_target_mode_is_a_warning(tmp_path):
    # Shannon: a loop sampled at fs cannot act above fs / 2 (export refuses it; tune warns)
    text = (ROOT / "plants" / "oscillator.toml").read_text()  # one mode at 31.83 Hz
    low = tmp_path / "low.toml"
    low.write_text(text.replace("sample_rate_hz = 10000.0", "sample_rate_hz = 60.0"))
    out_path = tmp_path / "d.json"
    code, out, err = _run(str(low), "--law", "dvf", "--pairs", "coil_vel", "-o", str(out_path),
                          "--json")
    assert code in (0, 1), err
    warnings = json.loads(out)["warnings"]
    assert any("below twice mode 1 (31.831 Hz)" in w and "--allow-aliasing" in w
               for w in warnings), warnings
    ok = tmp_path / "ok.toml"
    ok.write_text(text.replace("sample_rate_hz = 10000.0", "sample_rate_hz = 64.0"))
    code, out, err = _run(str(ok), "--law", "dvf", "--pairs", "coil_vel", "-o",
                          str(tmp_path / "e.json"), "--json")
    assert not any("below twice" in w for w in json.loads(out)["warnings"])
