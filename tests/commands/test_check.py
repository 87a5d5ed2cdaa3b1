"""``dampctl check``: human and JSON output on the example plants."""

import io
import json

import numpy as np
import pytest
from repo import ROOT

from dampctl.commands.cli import main
from dampctl.model.plantfile import load_plant

PLANTS = ROOT / "plants"


def run(*args: str) -> tuple[int, str, str]:
    out, err = io.StringIO(), io.StringIO()
    code = main(["check", *args], stdout=out, stderr=err)
    return code, out.getvalue(), err.getvalue()


@pytest.mark.parametrize("name", ["scanning_stage", "light_truss", "oscillator"])
def test_json_keys(name):
    code, out, err = run(str(PLANTS / f"{name}.toml"), "--json")
    assert code == 0, err
    data = json.loads(out)
    plant = load_plant(PLANTS / f"{name}.toml")
    for key in ("plant", "modes", "first_freq_hz", "pairs", "warnings"):
        assert key in data
    assert data["plant"] == plant.title
    assert [m["mode"] for m in data["modes"]] == list(range(1, plant.n_modes + 1))
    for row, mode in zip(data["modes"], plant.modes, strict=True):
        assert set(row) >= {"mode", "label", "freq_hz", "damping", "modal_mass_kg"}
        assert row["freq_hz"] == mode.freq_hz
        assert row["damping"] == mode.damping
        assert row["modal_mass_kg"] == mode.modal_mass_kg
        assert row["label"] == mode.label
    assert data["first_freq_hz"] == pytest.approx(min(plant.freqs_hz))
    assert [p["pair"] for p in data["pairs"]] == [p.name for p in plant.pairs]
    for pair in data["pairs"]:
        assert set(pair) >= {"pair", "collocated", "participation"}
        assert isinstance(pair["collocated"], bool)
        assert len(pair["participation"]) == plant.n_modes
        assert all(0.0 <= x <= 1.0 for x in pair["participation"])
    assert isinstance(data["warnings"], list)
    assert data["fingerprint"] == plant.fingerprint


def test_stage_findings():
    # the stage has a near-repeated x/y pair (0.8 % apart), six collocated pairs and a probe
    code, out, _ = run(str(PLANTS / "scanning_stage.toml"), "--json")
    assert code == 0
    data = json.loads(out)
    assert len(data["pairs"]) == 6
    assert all(p["collocated"] for p in data["pairs"])
    stage = [m["mode"] for m in data["modes"] if m["label"] in ("stage x", "stage y")]
    assert [c["modes"] for c in data["clusters"]] == [stage]
    assert data["clusters"][0]["pairs_needed"] == 2
    assert data["clusters"][0]["rank"] == 2
    assert "probe_x" in data["dominant_modes"]
    assert data["dominant_modes"]["probe_x"][0]["mode"] == stage[0]
    # participation shares of each mode sum to one over the pairs of one kind
    velocity = np.array(
        [p["participation"] for p in data["pairs"] if p["kind"] == "force/velocity"]
    )
    seen = velocity.sum(axis=0) > 0
    np.testing.assert_allclose(velocity.sum(axis=0)[seen], 1.0, rtol=1e-12)


def test_human_output():
    code, out, err = run(str(PLANTS / "scanning_stage.toml"))
    assert code == 0 and err == ""
    plant = load_plant(PLANTS / "scanning_stage.toml")
    assert out.startswith(f"{plant.title}: 8 modes, 4 actuators, 6 sensors, 6 candidate pairs")
    for heading in ("mode", "label", "freq (Hz)", "damping", "modal mass (kg)"):
        assert heading in out
    assert f"first natural frequency: {min(plant.freqs_hz):.4g} Hz" in out
    assert "participation: share of each mode's Hankel singular value" in out
    for pair in plant.pairs:
        assert f"\n{pair.name} " in out
    assert "output probe_x: motion dominated by mode" in out
    assert "near-repeated" in out
    # mode 1 (frame rz) is seen by no pair: its column shows no misleading shares
    assert "no pair sees mode(s) 1" in out
    vx1 = next(line for line in out.splitlines() if line.startswith("vx1 "))
    assert vx1.split()[3] == "-" and "(-: no pair sees the mode" in out
    code, out, _ = run(str(PLANTS / "oscillator.toml"))
    assert code == 0
    assert "1 mode, 1 actuator, 2 sensors, 2 candidate pairs" in out


def test_bad_cluster_tolerance():
    code, out, err = run(str(PLANTS / "oscillator.toml"), "--cluster-tol", "0")
    assert code == 2 and out == ""
    assert err.splitlines() == [
        "dampctl check: error: argument --cluster-tol: must be in (0, 1), got 0"
    ]


def test_bundled_demo_is_the_example_plant():
    bundled = ROOT / "dampctl" / "data" / "scanning_stage.toml"
    assert bundled.read_bytes() == (PLANTS / "scanning_stage.toml").read_bytes()


def test_plant_without_pairs(tmp_path):
    path = tmp_path / "bare.toml"
    path.write_text('[[modes]]\nfreq_hz = 10.0\ndamping = 0.01\n[sites]\na = [1.0]\n')
    code, out, err = run(str(path), "--json")
    assert code == 0, err
    data = json.loads(out)
    assert data["pairs"] == [] and data["unseen_modes"] == [1]
    assert any("no candidate pairs" in w for w in data["warnings"])
    code, out, _ = run(str(path))
    assert code == 0 and "0 candidate pairs" in out


def test_human_output_of_a_3000_mode_plant_stays_readable(tmp_path):
    # Issue 20 point 4: tables readable on a 3000-mode plant (summaries and the lowest modes;
    # every mode and share in --json). The plant: the bending modes of a simply supported
    # beam, ω_n = (nπ/L)² √(EI/ρA), shapes sin(nπx/L) (R. D. Blevins, Formulas for Natural
    # Frequency and Mode Shape, 1979, table for beams: pinned-pinned), sampled at 3 points.
    from dampctl.model.components import Actuator, Mode, Pair, Sensor
    from dampctl.model.plant import ModalPlant
    from dampctl.model.plantfile import dump_plant

    n = np.arange(1, 3001)
    freqs = (n * np.pi) ** 2 * 0.05 / (2 * np.pi)
    sites = {f"x{j}": list(np.sin(n * np.pi * x)) for j, x in enumerate((0.13, 0.41, 0.77))}
    plant = ModalPlant(
        modes=[Mode(freq_hz=f, damping=0.01, modal_mass_kg=0.5) for f in freqs],
        sites=sites,
        actuators=[Actuator(name=f"f{j}", kind="force", site=f"x{j}") for j in range(2)],
        sensors=[Sensor(name=f"v{j}", kind="velocity", site=f"x{j}") for j in range(2)],
        pairs=[Pair(name=f"p{j}", actuator=f"f{j}", sensor=f"v{j}") for j in range(2)],
        title="simply supported beam, 3000 modes",
    )
    path = tmp_path / "beam.toml"
    path.write_text(dump_plant(plant))
    code, out, err = run(str(path))
    assert code == 0, err
    lines = out.splitlines()
    assert max(len(line) for line in lines) <= 200 and len(lines) < 120
    assert "... and 2980 more modes" in out and "--json" in out
    assert "strongest above m10" in out
    code, out, err = run(str(path), "--json")
    data = json.loads(out)
    assert len(data["modes"]) == 3000 and len(data["pairs"][0]["participation"]) == 3000
