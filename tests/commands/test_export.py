"""``dampctl export``, run in-process."""

from __future__ import annotations

import io
import json
from dataclasses import replace

import numpy as np
import pytest

from dampctl.commands.cli import main
from dampctl.design import Branch, Design, Loop, Section
from dampctl.model.plantfile import dump_plant
from dampctl.testing import chain_plant


@pytest.fixture(scope="module")
def plant():
    chain = chain_plant([1.0, 1.0, 1.0], [4e5, 4e5, 4e5], damping=0.005)
    # the actuators' limit sets the fixed-point signal range by default
    return replace(chain, actuators=tuple(replace(a, max_force_n=50.0) for a in chain.actuators))


def _dvf(plant):
    g = 200.0
    rolloff = Section((1.0,), (1 / (2 * np.pi * 2000.0), 1.0))
    return Design(
        law="dvf",
        plant_fingerprint=plant.fingerprint,
        actuators=("f3",),
        sensors=("v3",),
        target_modes=(1, 2, 3),
        loops=(Loop("p3", "f3", "v3", g, branches=(Branch(gain=g, sections=(rolloff,)),)),),
    )


def _slow_ppf(plant):
    # a PPF filter at 45 Hz with ζ = 0.01 on a 50 kHz target: θ = ωT ≈ 0.0057 rad, far too
    # sensitive for Q1.14 coefficients (∂θ/∂a1 = 1/(2 r sin θ) ≈ 88)
    w = 2 * np.pi * 45.0
    branch = Branch(
        gain=-0.2 * w**2,
        sections=(Section((1.0,), (1.0, 2 * 0.01 * w, w**2)),),
        label="mode 1 filter",
    )
    return Design(
        law="ppf",
        plant_fingerprint=plant.fingerprint,
        actuators=("f3",),
        sensors=("x3",),
        target_modes=(1,),
        loops=(Loop("q3", "f3", "x3", 0.2, branches=(branch,)),),
    )


def _files(tmp_path, plant, design):
    (tmp_path / "plant.toml").write_text(dump_plant(plant))
    (tmp_path / "design.json").write_text(design.to_json())
    return str(tmp_path / "plant.toml"), str(tmp_path / "design.json")


def _run(args):
    out, err = io.StringIO(), io.StringIO()
    code = main(["export", *args], stdout=out, stderr=err)
    return code, out.getvalue(), err.getvalue()


def test_export_writes_files_and_prints_safety(tmp_path, plant):
    p, d = _files(tmp_path, plant, _dvf(plant))
    code, out, err = _run([p, d, "--rate", "10000", "-o", str(tmp_path / "out")])
    assert code == 0, err
    assert sorted(f.name for f in (tmp_path / "out").iterdir()) == [
        "controller.h",
        "controller.json",
        "sections.csv",
    ]
    assert "stable: yes" in out
    assert "Safety:" in out and "emergency stop" in out


def test_export_json_keys(tmp_path, plant):
    p, d = _files(tmp_path, plant, _dvf(plant))
    code, out, _ = _run(
        [
            p,
            d,
            "--rate",
            "10000",
            "--method",
            "zoh",
            "--fixed",
            "q31",
            "--format",
            "json,csv",
            "-o",
            str(tmp_path / "out"),
            "--json",
        ]
    )
    assert code == 0
    data = json.loads(out)
    assert data["rate_hz"] == 10000.0 and data["method"] == "zoh"
    assert data["loops"][0]["pair"] == "p3" and len(data["loops"][0]["sos"][0]) == 6
    row = data["verification"]["modes"][0]
    assert {"mode", "continuous_damping", "discrete_damping", "fixed_damping"} <= set(row)
    assert len(data["files"]) == 2


def test_oversensitive_q15_section_exits_1_naming_it(tmp_path, plant):
    p, d = _files(tmp_path, plant, _slow_ppf(plant))
    code, out, err = _run([p, d, "--rate", "50000", "--fixed", "q15", "-o", str(tmp_path / "o")])
    assert code == 1
    assert "loop q3, section 1: quantized pole radius" in err  # rounded onto |z| = 1
    assert "no files written" in out and not (tmp_path / "o").exists()
    code, _, err = _run([p, d, "--rate", "20000", "--fixed", "q15", "-o", str(tmp_path / "o")])
    assert code == 1
    assert "loop q3, section 1: pole frequency moves by" in err
    # the advice: the other format, or the rate the pole-sensitivity estimate allows
    assert "use q31, or a sample rate of at most about" in err
    code, _, err = _run([p, d, "--rate", "50000", "--fixed", "q31", "-o", str(tmp_path / "o")])
    assert code == 0, err


def test_fingerprint_mismatch_exits_2(tmp_path, plant):
    other = chain_plant([1.0, 1.0, 1.0], [4e5, 4e5, 5e5], damping=0.005)
    p, d = _files(tmp_path, plant, _dvf(other))
    code, _, err = _run([p, d, "--rate", "10000", "-o", str(tmp_path / "out")])
    assert code == 2
    assert "plant_fingerprint" in err


@pytest.mark.parametrize(
    ("extra", "message"),
    [
        (["--prewarp", "fast"], "--prewarp: expected auto, none or a frequency"),
        (["--format", "json,xml"], "--format: expected some of json, csv, c"),
        (["--method", "zoh", "--prewarp", "100"], "Tustin only"),
        (["--tolerance", "-1"], "--tolerance: must be in (0, 1], got -1"),
    ],
)
def test_bad_options_exit_2(tmp_path, plant, extra, message):
    p, d = _files(tmp_path, plant, _dvf(plant))
    code, _, err = _run([p, d, "--rate", "10000", "-o", str(tmp_path / "out"), *extra])
    assert code == 2
    assert message in err


def test_rate_is_required_without_plant_rate(tmp_path, plant):
    p, d = _files(tmp_path, plant, _dvf(plant))
    code, _, err = _run([p, d, "-o", str(tmp_path / "out")])
    assert code == 2 and "--rate is required" in err


def test_mimo_design_exports_modal_paths(tmp_path, plant):
    A = np.array([[-30.0, 400.0], [-400.0, -30.0]])
    design = Design(
        law="lqg",
        plant_fingerprint=plant.fingerprint,
        actuators=("f1", "f3"),
        sensors=("v1", "v3"),
        target_modes=(1,),
        controller=(
            A,
            np.array([[1.0, 0.5], [0.0, 1.0]]),
            np.array([[20.0, 0.0], [5.0, 10.0]]),
            np.zeros((2, 2)),
        ),
    )
    p, d = _files(tmp_path, plant, design)
    code, out, err = _run(
        [p, d, "--rate", "10000", "--fixed", "q31", "-o", str(tmp_path / "o"), "--json"]
    )
    assert code == 0, err
    data = json.loads(out)
    assert len(data["paths"]) == 4
    header = (tmp_path / "o" / "controller.h").read_text()
    assert "dampctl_f1__v1_command" in header


def test_output_must_be_a_folder_and_existing_files_need_force(tmp_path, plant):
    p, d = _files(tmp_path, plant, _dvf(plant))
    code, _, err = _run([p, d, "--rate", "10000", "-o", d])
    assert code == 2 and "is not a folder" in err
    out_dir = str(tmp_path / "out")
    assert _run([p, d, "--rate", "10000", "-o", out_dir])[0] == 0
    code, _, err = _run([p, d, "--rate", "10000", "-o", out_dir])
    assert code == 2 and "already exists (use --force to replace)" in err
    assert _run([p, d, "--rate", "10000", "-o", out_dir, "--force"])[0] == 0


def test_near_miss_of_the_sampled_damping_gets_a_retuning_hint():
    # a shortfall under 1 % (the tuning met the target exactly in continuous time) says how to
    # tune with headroom; a real shortfall is only reported
    from types import SimpleNamespace

    from dampctl.commands.export import _unmet
    from dampctl.model.components import Requirements

    plant = chain_plant([1.0, 1.0], [1e5, 1e5], damping=0.01)
    plant = replace(plant, requirements=Requirements(modes=(1, 2), min_damping=0.015))
    verification = SimpleNamespace(discrete_damping=np.array([0.01499, 0.0120]))
    result = SimpleNamespace(
        fixed_verification=None,
        verification=verification,
        controller=SimpleNamespace(target_modes=(1, 2)),
    )
    near, far = _unmet(plant, result)
    assert near.startswith("mode 1: sampled-loop damping 0.01499 < required 0.015 (0.067 % short")
    assert near.endswith("--target-damping 0.01515)")
    assert far == "mode 2: sampled-loop damping 0.012 < required 0.015"


def test_fixed_point_needs_a_signal_range(tmp_path):
    bare = chain_plant([1.0, 1.0, 1.0], [4e5, 4e5, 4e5], damping=0.005)  # no actuator limits
    p, d = _files(tmp_path, bare, _dvf(bare))
    code, _, err = _run([p, d, "--rate", "10000", "--fixed", "q15", "-o", str(tmp_path / "o")])
    assert code == 2 and "--input-range" in err and err.count("\n") == 1
    assert not (tmp_path / "o").exists()
    code, out, err = _run(
        [p, d, "--rate", "10000", "--fixed", "q15", "--input-range", "p3=0.02",
         "-o", str(tmp_path / "o"), "--json"]
    )
    assert code == 0, err
    loop = json.loads(out)["fixed_point"]["loops"][0]
    assert loop["input_full_scale"] == 0.02 and loop["output_limit"] is None
    assert loop["noise_rms"] > 0 and loop["coefficient_error_rms"] > 0
    for bad, what in (("p9=1", "not a loop"), ("x", "expected a number"), ("-1", "positive")):
        code, _, err = _run(
            [p, d, "--rate", "10000", "--fixed", "q15", "--input-range", bad,
             "-o", str(tmp_path / "bad")]
        )
        assert code == 2 and what in err, err


def test_passive_design_gives_a_parts_list(tmp_path, plant):
    from dampctl.model.components import PartPrice
    from dampctl.model.passive import Absorber

    priced = replace(plant, parts=(PartPrice("tuned mass", "absorber", 20.0, 100.0),))
    design = Design(law="tmd", plant_fingerprint=plant.fingerprint, actuators=(), sensors=(),
                    target_modes=(1,), parts=(Absorber(1, "m3", 0.05, 50.0, 0.1),))
    p, d = _files(tmp_path, priced, design)
    out, err = io.StringIO(), io.StringIO()
    code = main(["export", p, d, "-o", str(tmp_path / "out")], stdout=out, stderr=err)
    assert code == 0, err.getvalue()
    assert "passive, no loop — nothing to export" in out.getvalue()
    data = json.loads((tmp_path / "out" / "parts.json").read_text())
    assert data["format"] == "dampctl-parts"
    assert data["total_cost"] == pytest.approx(20.0 + 100.0 * 0.05)
    assert data["parts"][0]["mass_kg"] == 0.05 and data["added_mass_kg"] == 0.05
    csv_text = (tmp_path / "out" / "parts.csv").read_text()
    assert csv_text.splitlines()[0].startswith("part,label,mode,site")
    assert not (tmp_path / "out" / "controller.h").exists()


def test_a_rate_below_twice_a_controlled_mode_is_refused(tmp_path, plant):
    # Shannon: a loop sampled at fs acts on nothing above fs / 2. The chain's modes
    top = plant.modes[-1].freq_hz  # the highest controlled mode (target modes 1, 2, 3)
    p, d = _files(tmp_path, plant, _dvf(plant))
    rate = 1.9 * top  # Nyquist 0.95 top: mode 3 only is above it
    code, _out, err = _run([p, d, "-o", str(tmp_path / "x"), "--rate", f"{rate!r}"])
    assert code == 2 and "mode 3" in err and "mode 2" not in err and "--allow-aliasing" in err
    assert not (tmp_path / "x").exists()
    code, _out, err = _run([p, d, "-o", str(tmp_path / "x"), "--rate", f"{2.01 * top!r}"])
    assert code in (0, 1) and "--allow-aliasing" not in err, err  # 1: unstable when sampled
    code, _out, err = _run([p, d, "-o", str(tmp_path / "y"), "--rate", f"{rate!r}",
                           "--allow-aliasing"])
    assert code in (0, 1) and "--allow-aliasing" not in err  # no longer refused as bad input


def test_a_ppf_target_above_nyquist_is_refused(tmp_path, plant):
    p, d = _files(tmp_path, plant, _slow_ppf(plant))  # PPF filter on mode 1
    rate = 1.5 * plant.modes[0].freq_hz
    code, _out, err = _run([p, d, "-o", str(tmp_path / "x"), "--rate", f"{rate!r}"])
    assert code == 2 and "mode 1" in err and "PPF" in err


def test_modes_above_nyquist_closed_form(plant):
    from dampctl.discrete.export import modes_above_nyquist

    f = [m.freq_hz for m in plant.modes]
    assert modes_above_nyquist(plant, (1, 2, 3), 2 * f[1]) == ((2, f[1]), (3, f[2]))
    assert modes_above_nyquist(plant, (1, 2), 2.0001 * f[1]) == ()
    assert modes_above_nyquist(plant, (1,), 2 * f[1]) == ()
