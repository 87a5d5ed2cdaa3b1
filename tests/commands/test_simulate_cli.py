"""``dampctl simulate`` and ``dampctl shape`` in-process: keys, files, exit codes, errors."""

import io
import json
import math

import jsonschema
import pytest
from repo import PLANTS

from dampctl.commands.cli import main
from dampctl.schemas import load_schema

OSCILLATOR = str(PLANTS / "oscillator.toml")


def run(argv):
    out, err = io.StringIO(), io.StringIO()
    code = main(argv, stdout=out, stderr=err)
    return code, out.getvalue(), err.getvalue()


def valid(document, name):
    errors = list(jsonschema.Draft202012Validator(load_schema(name)).iter_errors(document))
    assert not errors, [e.message for e in errors[:5]]


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    folder = tmp_path_factory.mktemp("simulate")
    design = folder / "dvf.json"
    code, _, err = run(["tune", OSCILLATOR, "--law", "dvf", "--pairs", "coil_vel", "-o",
                        str(design)])
    assert code in (0, 1), err
    shaper = folder / "zvd.json"
    code, out, err = run(["shape", OSCILLATOR, str(design), "--modes", "1", "-o", str(shaper),
                          "--json"])
    assert code == 0, err
    return {"folder": folder, "design": str(design), "shaper": str(shaper),
            "shape_json": json.loads(out)}


def test_move_json_has_the_keys_of_the_issue(files):
    code, out, err = run(["simulate", OSCILLATOR, files["design"], "--drive", "coil", "--move",
                          "1e-6", "--output", "mass_x", "--json"])
    assert code == 0, err
    doc = json.loads(out)
    valid(doc, "simulation")
    assert doc["format"] == "dampctl-simulation" and doc["loop"] == "closed"
    for part in (doc, doc["open_loop"]):
        assert set(part["outputs"]["mass_x"]) >= {"peak", "final", "overshoot",
                                                  "settling_time_s", "residual_rms"}
        assert set(part["actuators"]["coil"]) >= {"peak_force_n", "rms_force_n",
                                                  "saturated_s"}
    closed, opened = doc["outputs"]["mass_x"], doc["open_loop"]["outputs"]["mass_x"]
    # the damped loop (ζ = 0.1 designed) settles faster and overshoots less than ζ = 0.01
    assert closed["settling_time_s"] < opened["settling_time_s"]
    assert closed["overshoot"] < opened["overshoot"]
    assert opened["overshoot"] == pytest.approx(100 * math.exp(-0.01 * math.pi), rel=2e-3)
    assert doc["setup"]["static_input"] == pytest.approx(1e-6 * 8.0e4, rel=1e-9)
    assert doc["safety"]


def test_shaped_move_and_plots(files, tmp_path):
    plots = tmp_path / "plots"
    argv = ["simulate", OSCILLATOR, "--drive", "coil", "--move", "2e-6", "--output", "mass_x",
            "--shaper", files["shaper"], "--profile", "trapezoid", "--max-velocity", "1e-3",
            "--max-acceleration", "1.0", "--settle-band", "0.5%", "--plots", str(plots)]
    code, out, err = run(argv)
    assert code == 0, err
    assert "trapezoid move" in out and "ZVD shaper" in out
    assert sorted(p.name for p in plots.iterdir()) == ["force.png", "move_mass_x.png"]
    code, _, err = run(argv)  # the figures exist: refused without --force
    assert code == 2 and "already exists" in err
    code, _, err = run([*argv, "--force"])
    assert code == 0, err


def test_disturbance_record_from_csv(tmp_path):
    record = tmp_path / "push.csv"
    record.write_text("time_s,value\n0,0\n0.01,1\n0.02,0\n0.5,0\n")
    code, out, err = run(["simulate", OSCILLATOR, "--disturbance", "push", "--profile",
                          f"file:{record}", "--json"])
    assert code == 0, err
    doc = json.loads(out)
    valid(doc, "simulation")
    assert doc["kind"] == "disturbance" and doc["setup"]["source"] == "record"
    assert doc["duration_s"] == pytest.approx(0.5, abs=1e-4)
    assert doc["outputs"]["mass_x"]["rms_error"] is None
    # a random record of the PSD carries its statistical error
    code, out, err = run(["simulate", OSCILLATOR, "--disturbance", "push", "--duration", "2",
                          "--json"])
    assert code == 0, err
    assert 0 < json.loads(out)["outputs"]["mass_x"]["rms_error"] < 0.5


@pytest.mark.parametrize(
    ("extra", "message"),
    [
        (["--drive", "coil"], "needs --move"),
        (["--disturbance", "push", "--move", "1e-6"], "--move belongs to a move"),
        (["--drive", "coil", "--move", "1e-6", "--output", "mass_x", "--profile", "sine"],
         "--profile: expected one of"),
        (["--drive", "coil", "--move", "1e-6", "--output", "mass_x", "--settle-band", "x%"],
         "--settle-band"),
        (["--drive", "nope", "--move", "1e-6", "--output", "mass_x"], "unknown drive"),
        (["--drive", "coil", "--move", "1e-6", "--output", "vel"], "not a displacement"),
        (["--drive", "coil", "--move", "1e-6", "--output", "mass_x", "--profile", "trapezoid"],
         "--max-velocity"),
    ],
)
def test_bad_options_exit_2_with_one_line(extra, message):
    code, _out, err = run(["simulate", OSCILLATOR, *extra])
    assert code == 2 and message in err and err.count("\n") == 1


def test_bad_record_names_file_and_row(tmp_path):
    record = tmp_path / "r.csv"
    record.write_text("time_s,value\n0,0\n0.1,abc\n")
    code, _, err = run(["simulate", OSCILLATOR, "--disturbance", "push", "--profile",
                        f"file:{record}"])
    assert code == 2 and "r.csv: row 3" in err


def test_shape_file_json_and_refusals(files, tmp_path):
    doc = files["shape_json"]
    valid(doc, "shape")
    valid(json.loads(open(files["shaper"]).read()), "shaper")
    assert doc["loop"] == "closed" and doc["kind"] == "zvd"
    assert doc["modes"][0]["damping"] > 0.05  # the damped mode
    target = tmp_path / "s.json"
    code, out, err = run(["shape", OSCILLATOR, "--modes", "1", "--insensitivity", "±30%", "-o",
                          str(target)])
    assert code == 1 and "does not stay under" in err
    assert "NOT met" in out and target.exists()
    code, _, err = run(["shape", OSCILLATOR, "--modes", "1", "-o", str(target)])
    assert code == 2 and "already exists" in err
    code, _, err = run(["shape", OSCILLATOR, "--modes", "1", "-o", OSCILLATOR, "--force"])
    assert code == 2 and "input" in err
    code, _, err = run(["shape", OSCILLATOR, "--modes", "2", "-o", str(tmp_path / "t.json")])
    assert code == 2 and "mode 2 does not exist" in err
    code, _, err = run(["shape", OSCILLATOR, "--modes", "1", "--insensitivity", "lots", "-o",
                        str(tmp_path / "t.json")])
    assert code == 2 and "--insensitivity" in err


def test_passive_design_moves_with_its_parts(files):
    folder = files["folder"]
    design = folder / "tmd.json"
    code, _, err = run(["tune", OSCILLATOR, "--law", "tmd", "--modes", "1", "--mass-ratio",
                        "0.05", "-o", str(design)])
    assert code in (0, 1), err
    shaper = folder / "zvd_tmd.json"
    code, out, err = run(["shape", OSCILLATOR, str(design), "--modes", "1", "-o", str(shaper),
                          "--json"])
    assert code == 0, err  # shaped for the structure with its absorber
    code, out, err = run(["simulate", OSCILLATOR, str(design), "--drive", "coil", "--move",
                          "1e-6", "--output", "mass_x", "--shaper", str(shaper), "--json"])
    assert code == 0, err
    data = json.loads(out)
    valid(data, "simulation")
    assert data["setup"]["passive"] == "tmd" and data["loop"] == "closed"
    assert data["outputs"]["mass_x"]["settling_time_s"] is not None
    code, out, _ = run(["simulate", OSCILLATOR, str(design), "--drive", "coil", "--move",
                        "1e-6", "--output", "mass_x"])
    assert "with its passive parts (tmd): continuous, no loop" in out
    code, _, err = run(["simulate", OSCILLATOR, str(design), "--disturbance", "push"])
    assert code == 2 and "a move" in err
