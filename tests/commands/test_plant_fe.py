"""``dampctl plant fe``: a plant file from FE matrices, checked against the closed form of a
cantilever (R. D. Blevins, Formulas for Natural Frequency and Mode Shape, 1979)."""

import hashlib
import io
import json
import math

import numpy as np
import pytest
import scipy.io as sio
import scipy.sparse as sp
from femodels import CANTILEVER_BETA_L, beam
from test_schemas import assert_valid

from dampctl.commands.cli import main
from dampctl.model.plantfile import load_plant


def _run(*argv):
    out, err = io.StringIO(), io.StringIO()
    code = main(list(argv), stdout=out, stderr=err)
    return code, out.getvalue(), err.getvalue()


def _folder_state(folder):
    return {p.name: hashlib.sha256(p.read_bytes()).hexdigest() for p in folder.iterdir()}


@pytest.fixture()
def cantilever(tmp_path):
    M, K, _ = beam(40, ei=100.0, rho_a=2.0)
    sio.mmwrite(tmp_path / "M.mtx", M, symmetry="symmetric")
    sp.save_npz(tmp_path / "K.npz", K)
    return tmp_path


def test_cantilever_plant_from_mtx_and_npz(cantilever):
    out_file = cantilever / "beam.toml"
    code, out, err = _run("plant", "fe", "--mass", str(cantilever / "M.mtx"), "--stiffness",
                          str(cantilever / "K.npz"), "--site", "tip=79", "--site", "mid=39",
                          "--modes", "5", "--damping", "0.02", "-o", str(out_file), "--json")
    assert code == 0, err
    doc = json.loads(out)
    assert_valid(doc)
    expected = [b**2 / (2 * math.pi) * math.sqrt(100.0 / 2.0) for b in CANTILEVER_BETA_L]
    np.testing.assert_allclose([m["freq_hz"] for m in doc["modes"]], expected, rtol=2e-5)
    assert doc["dofs"] == 80 and doc["solver"] == "dense" and doc["rigid_modes"] == 0
    assert doc["sites"] == [{"name": "tip", "dof": 79}, {"name": "mid", "dof": 39}]
    plant = load_plant(out_file)
    np.testing.assert_allclose(plant.freqs_hz, [m["freq_hz"] for m in doc["modes"]])
    assert [m.damping for m in plant.modes] == [0.02] * 5
    assert sorted(plant.sites) == ["mid", "tip"]
    # the tip moves most in the first mode and the mid-span node is on the second's slope
    assert abs(plant.sites["tip"][0]) > abs(plant.sites["mid"][0])
    code, out, err = _run("check", str(out_file))
    assert code == 0, err


def test_sites_file_frequency_limit_and_rayleigh(cantilever):
    (cantilever / "sites.csv").write_text("name,dof\ntip,79\nquarter,19\n")
    out_file = cantilever / "beam.toml"
    code, out, err = _run("plant", "fe", "--mass", str(cantilever / "M.mtx"), "--stiffness",
                          str(cantilever / "K.npz"), "--sites", str(cantilever / "sites.csv"),
                          "--max-freq-hz", "100", "--rayleigh", "0.5,1e-5", "-o", str(out_file))
    assert code == 0, err
    plant = load_plant(out_file)
    assert len(plant.modes) == 3  # 3.96, 24.8, 69.4 Hz; the fourth is at 136 Hz
    w = 2 * np.pi * plant.freqs_hz
    np.testing.assert_allclose([m.damping for m in plant.modes], 0.5 / (2 * w) + 1e-5 * w / 2)
    assert "rows:" not in out and "wrote" in out


@pytest.mark.parametrize(
    ("change", "message"),
    [
        ({"--site": "tip=81"}, "out of range"),
        ({"--site": "tip"}, "NAME=DOF"),
        ({"--modes": "0"}, "--modes"),
        ({"--stiffness": "nonsym.mtx"}, "symmetric"),
        ({"--stiffness": "small.mtx"}, "10 x 10 but the mass matrix is 80 x 80"),
        ({"--mass": "missing.mtx"}, "missing.mtx"),
        ({"--mass": "M.txt"}, "suffix"),
        ({"--sites": "bad.csv"}, "bad.csv"),
        ({"--rayleigh": "1"}, "--rayleigh"),
        ({"--damping-file": "damping.csv"}, "mode 2"),
    ],
)
def test_bad_input_names_the_problem_and_writes_nothing(cantilever, change, message):
    _M, K, _ = beam(40)
    bad = K.tolil()
    bad[0, 1] += 1e3
    sio.mmwrite(cantilever / "nonsym.mtx", bad.tocsr())
    sio.mmwrite(cantilever / "small.mtx", K[:10, :10], symmetry="symmetric")
    (cantilever / "M.txt").write_text("not a matrix\n")
    (cantilever / "bad.csv").write_text("name,dof\ntip,eighty\n")
    (cantilever / "damping.csv").write_text("mode,damping\n1,0.01\n")
    options = {"--mass": "M.mtx", "--stiffness": "K.npz", "--site": "tip=79", "--modes": "3"}
    options.update(change)
    argv = ["plant", "fe"]
    for key, value in options.items():
        if key in ("--mass", "--stiffness", "--sites", "--damping-file"):
            value = str(cantilever / value)
        argv += [key, value]
    if "--sites" in change:
        argv.remove("--site"), argv.remove("tip=79")
    before = _folder_state(cantilever)
    code, _out, err = _run(*argv, "-o", str(cantilever / "plant.toml"))
    assert code == 2, err
    assert message.lower() in err.lower(), err
    assert "Traceback" not in err and len(err.strip().splitlines()) == 1
    assert _folder_state(cantilever) == before


def test_existing_output_needs_force_and_a_free_body_is_refused_plainly(cantilever):
    target = cantilever / "beam.toml"
    target.write_text("# mine\n")
    common = ["plant", "fe", "--mass", str(cantilever / "M.mtx"), "--stiffness",
              str(cantilever / "K.npz"), "--site", "tip=79", "--modes", "2"]
    code, _, err = _run(*common, "-o", str(target))
    assert code == 2 and "--force" in err and target.read_text() == "# mine\n"
    assert _run(*common, "-o", str(target), "--force")[0] == 0
    M, K, _ = beam(10, clamped=False)
    sio.mmwrite(cantilever / "Mf.mtx", M, symmetry="symmetric")
    sio.mmwrite(cantilever / "Kf.mtx", K, symmetry="symmetric")
    code, _, err = _run("plant", "fe", "--mass", str(cantilever / "Mf.mtx"), "--stiffness",
                        str(cantilever / "Kf.mtx"), "--site", "tip=21", "--modes", "3",
                        "-o", str(cantilever / "free.toml"))
    assert code == 2 and "rigid-body" in err
    assert not (cantilever / "free.toml").exists()
