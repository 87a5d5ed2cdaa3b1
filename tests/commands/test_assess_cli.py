"""``dampctl assess``: exit codes 0/1/2, JSON keys, figures, safety lines (run in-process)."""

import io
import json
from dataclasses import replace

import pytest

from dampctl.commands._common import SAFETY_LINES
from dampctl.commands.cli import main
from dampctl.design import Branch, Design, Loop
from dampctl.model.components import Disturbance, Output, Requirements
from dampctl.model.plantfile import dump_plant
from dampctl.testing import sdof_plant


def _files(tmp_path, *, max_rms=1e-4, gain=72.0, other_plant=False, max_force_n=None):
    base = sdof_plant(2.0, 8e4, 8.0)
    plant = replace(
        base,
        actuators=(replace(base.actuators[0], max_force_n=max_force_n),),
        disturbances=(Disturbance("w", "x", 1e-2),),
        outputs=(Output("xo", "displacement", "x"), Output("vo", "velocity", "x")),
        requirements=Requirements(
            modes=(1,),
            min_damping=0.05,
            sample_rate_hz=10000.0,
            min_phase_margin_deg=30.0,
            max_rms={"xo": max_rms},
        ),
    )
    design_plant = sdof_plant(2.0, 9e4, 8.0) if other_plant else plant
    design = Design(
        law="dvf",
        plant_fingerprint=design_plant.fingerprint,
        actuators=("f",),
        sensors=("v",),
        target_modes=(1,),
        loops=(Loop("fv", "f", "v", gain, (Branch(gain=gain),)),),
        pairs=("fv",),
    )
    plant_path = tmp_path / "plant.toml"
    design_path = tmp_path / "design.json"
    plant_path.write_text(dump_plant(plant))
    design_path.write_text(design.to_json())
    return str(plant_path), str(design_path)


def _run(*argv):
    out, err = io.StringIO(), io.StringIO()
    code = main(["assess", *argv], stdout=out, stderr=err)
    return code, out.getvalue(), err.getvalue()


def test_exit_0_when_every_requirement_is_met(tmp_path):
    code, out, err = _run(*_files(tmp_path), "--samples", "4")
    assert code == 0, err
    assert "STABLE" in out and "requirements:" in out
    assert "[met] min_damping" in out
    for line in SAFETY_LINES:
        assert line in out


def test_exit_1_names_the_requirement_and_the_shortfall(tmp_path):
    # closed-loop σ_x = √(W₀/(4k(c+g))) = 1.98e-5 m against a 1e-5 m limit
    code, out, err = _run(*_files(tmp_path, max_rms=1e-5), "--samples", "4")
    assert code == 1
    assert "max_rms.xo: required 1e-05, achieved 1.977e-05 (short by 9.768e-06)" in err
    assert "[NOT MET] max_rms.xo" in out


def test_exit_2_on_fingerprint_mismatch_and_bad_options(tmp_path):
    code, out, err = _run(*_files(tmp_path, other_plant=True))
    assert code == 2 and out == ""
    assert "design.json: plant_fingerprint: was designed for another plant" in err
    assert err.count("\n") == 1
    plant, design = _files(tmp_path)
    assert _run(plant, design, "--drift", "2")[0] == 2
    assert _run(plant, design, "--delay-s", "-1")[0] == 2
    assert _run(plant, str(tmp_path / "missing.json"))[0] == 2


def test_json_output_and_plots(tmp_path):
    plant, design = _files(tmp_path)
    figs = tmp_path / "figs"
    code, out, err = _run(plant, design, "--json", "--samples", "4", "--plots", str(figs))
    assert code == 0, err
    data = json.loads(out)
    for key in ("stable", "modes", "loops", "robustness", "rms", "effort", "requirements"):
        assert key in data
    assert data["modes"][0]["mode"] == 1
    assert data["loops"][0]["pair"] == "fv"
    assert data["all_met"] is True
    # 2 FRF, loop gain, |S| and |T|, Nyquist, locus, damping, 2 cumulative, 1/3 oct
    assert len(data["plots"]) == 10
    for path in data["plots"]:
        assert open(path, "rb").read(8) == b"\x89PNG\r\n\x1a\n"
    # the figures exist now: a second run refuses to replace them (exit 2) unless --force
    assert _run(plant, design, "--samples", "0", "--plots", str(figs))[0] == 2
    assert _run(plant, design, "--samples", "0", "--plots", str(figs), "--force")[0] == 0
    code, out, _ = _run(plant, design, "--json", "--samples", "0", "--plots",
                        str(tmp_path / "svg"), "--figure-format", "svg")
    assert code == 0 and all(p.endswith(".svg") for p in json.loads(out)["plots"])


@pytest.mark.parametrize("option", ["--delay-s", "--drift", "--samples", "--plots"])
def test_help_states_units_and_defaults(option, capsys):
    from dampctl.commands.cli import build_parser

    parser = build_parser()
    sub = parser._subparsers._group_actions[0].choices["assess"]
    action = next(a for a in sub._actions if option in a.option_strings)
    assert "default" in action.help


def test_effort_over_the_force_limit_is_warned(tmp_path):
    # σ_u = g σ_v = 72 · √(W₀/(4m(c+g))) = 0.285 N (Crandall & Mark 1963): 3σ > 0.5 N
    plant_path, design_path = _files(tmp_path, max_force_n=0.5)
    code, out, err = _run(plant_path, design_path, "--samples", "0")
    assert code == 0, err
    assert "WARNING: f: 3 x RMS exceeds its force limit" in out


def test_a_design_tuned_for_another_delay_is_pointed_out(tmp_path):
    plant_path, design_path = _files(tmp_path)
    data = json.loads(open(design_path).read())
    data["info"] = {"delay_s": 3e-4}
    open(design_path, "w").write(json.dumps(data))
    code, out, err = _run(plant_path, design_path, "--samples", "0")
    assert code in (0, 1), err
    assert "tuned for a loop delay of 300 µs" in out and "--delay-s 0.0003" in out
    code, out, _ = _run(plant_path, design_path, "--samples", "0", "--delay-s", "3e-4")
    assert code in (0, 1) and "tuned for a loop delay" not in out


def test_assess_passive_design(tmp_path):
    from dampctl.laws import tmd
    from dampctl.model.plantfile import load_plant

    plant_path, _ = _files(tmp_path)
    plant = load_plant(plant_path)
    design = tmd.design(plant, modes=[1], mass_ratio=0.05)
    path = tmp_path / "tmd.json"
    path.write_text(design.to_json())
    out, err = io.StringIO(), io.StringIO()
    code = main(["assess", plant_path, str(path)], stdout=out, stderr=err)
    text = out.getvalue()
    assert code in (0, 1)
    assert "margins: none (passive: no loop to break)" in text
    assert "[n/a] min_phase_margin_deg: does not apply (passive: no loop)" in text
    assert "part loads:" in text and "stroke (m)" in text
    assert "min_phase_margin_deg" not in err.getvalue()
    out = io.StringIO()
    main(["assess", plant_path, str(path), "--json"], stdout=out, stderr=io.StringIO())
    payload = json.loads(out.getvalue())
    assert payload["passive"] is True and payload["loops"] == []
    assert [r["name"] for r in payload["requirements"]][:2] == ["stability", "min_damping"]
