"""Export files: JSON keeps full precision, CSV lists the sections, the C header compiles and
its routines reproduce scipy ``sosfilt`` (float) and the integer model (fixed point).

The C checks use the system C compiler (``cc``/``gcc``) and skip when none is installed.
"""

from __future__ import annotations

import csv
import io
import json
import shutil
import subprocess

import numpy as np
import pytest
import scipy.signal
from export_helpers import ppf_bank

from dampctl.discrete.export import export_design
from dampctl.discrete.fixedpoint import run_fixed
from dampctl.discrete.writers import c_header, export_files, json_text, sections_csv
from dampctl.testing import sdof_plant

RATE = 10e3
COMPILER = shutil.which("cc") or shutil.which("gcc")
needs_cc = pytest.mark.skipif(COMPILER is None, reason="no C compiler (cc or gcc) on PATH")


@pytest.fixture(scope="module")
def plant():
    return sdof_plant(1.0, (2 * np.pi * 120.0) ** 2, 2 * 0.01 * 2 * np.pi * 120.0)


#: sensor (displacement) at full scale of the input word in the fixed-point tests (m)
INPUT_RANGE = 1e-3


def _result(plant, fixed="none", freqs=(120.0, 135.0)):
    design = ppf_bank(freqs, fingerprint=plant.fingerprint, gain=0.3, damping=0.2)
    return export_design(plant, design, RATE, fixed=fixed, input_range=INPUT_RANGE)


def test_json_holds_full_precision_and_metadata(plant):
    result = _result(plant)
    data = json.loads(json_text(result))
    assert data["rate_hz"] == RATE and data["method"] == "tustin" and data["prewarp"] == "auto"
    assert data["plant_fingerprint"] == plant.fingerprint
    lp = data["loops"][0]
    assert np.array_equal(np.array(lp["sos"]), result.controller.loops[0].sos)  # bit for bit
    assert lp["cascade_gain"] == result.controller.loops[0].cascade_gain
    assert lp["prewarp_hz"] == pytest.approx([120.0, 135.0])
    assert {"mode", "continuous_damping", "discrete_damping"} <= set(
        data["verification"]["modes"][0]
    )


def test_csv_lists_every_section_of_the_realisation(plant):
    rows = list(csv.DictReader(io.StringIO(sections_csv(_result(plant)))))
    real = _result(plant).realisations[0]
    assert len(rows) == sum(len(b.sos) for b in real.form.branches)
    first = real.form.branches[0]
    assert float(rows[0]["a1"]) == first.sos[0, 4]
    assert float(rows[0]["cascade_gain"]) == first.gain
    # fixed point: the scaled sections as they run, with the integers they are stored as
    result = _result(plant, fixed="q31")
    rows = list(csv.DictReader(io.StringIO(sections_csv(result))))
    fixed_real = result.fixed_realisations[0]
    section = fixed_real.sections[0][0]
    assert int(rows[0]["a1_int"]) == section.integers[3]
    assert int(rows[0]["a1_frac_bits"]) == section.a1_frac_bits == 30
    assert float(rows[0]["a1"]) == section.integers[3] / 2**30
    scale = fixed_real.scaling
    assert float(rows[0]["input_full_scale"]) == scale.input_full_scale == INPUT_RANGE
    assert float(rows[0]["output_scale"]) == scale.branches[0].output_scale
    assert float(rows[0]["cascade_gain"]) == pytest.approx(
        scale.branches[0].output_scale / INPUT_RANGE, rel=1e-15
    )


def _compile_and_run(tmp_path, header: str, main: str) -> list[float]:
    (tmp_path / "controller.h").write_text(header)
    (tmp_path / "main.c").write_text(main)
    exe = tmp_path / "run"
    build = subprocess.run(
        [COMPILER, "-std=c99", "-O1", "-Wall", "-Werror", "-o", str(exe), str(tmp_path / "main.c")],
        capture_output=True,
        text=True,
        timeout=60,
    )
    assert build.returncode == 0, build.stderr
    run = subprocess.run([str(exe)], capture_output=True, text=True, timeout=60)
    assert run.returncode == 0, run.stderr
    return [float(v) for v in run.stdout.split()]


@needs_cc
def test_c_float_routine_matches_sosfilt(tmp_path, plant):
    result = _result(plant, freqs=(120.0, 135.0, 900.0))
    real = result.realisations[0]
    n = 800
    main = f"""#include <stdio.h>
#include "controller.h"
int main(void) {{
    dampctl_real state[DAMPCTL_FX_STATES] = {{0}};
    for (int k = 0; k < {n}; ++k)
        printf("%.17g\\n", (double)dampctl_fx_command(state, k == 0 ? 1.0 : 0.0));
    return 0;
}}
"""
    got = np.array(_compile_and_run(tmp_path, c_header(result), main))
    impulse = np.zeros(n)
    impulse[0] = 1.0
    want = -sum(b.gain * scipy.signal.sosfilt(np.array(b.sos), impulse) for b in real.form.branches)
    assert np.max(np.abs(got - want)) <= 1e-6 * np.max(np.abs(want))


STRICT = ["-std=c99", "-Wall", "-Wextra", "-pedantic", "-Wdouble-promotion", "-Werror"]


@needs_cc
def test_c_fixed_routine_on_a_full_scale_random_input(tmp_path, plant):
    # A full-scale uniform random input word through the Q15 code of a PPF bank (the issue's
    # case: unscaled sections saturated 8653 of 20 000 samples). After Jackson's L∞ scaling:
    # no saturation, the integer model is bit exact, and the command error against the float
    # controller stays within the predicted rounding noise plus the coefficient error
    # (Oppenheim & Schafer, Discrete-Time Signal Processing, 2010: q²/12 per rounding).
    result = _result(plant, fixed="q15")
    assert not result.failures
    real = result.fixed_realisations[0]
    n = 20_000
    rng = np.random.default_rng(11)
    x = rng.integers(-(2**15), 2**15, size=n)
    (tmp_path / "x.txt").write_text("\n".join(str(int(v)) for v in x))
    calls = "\n".join(
        f"        y{j} = dampctl_fx_q_branch{j}(s{j}, x); printf(\" %d\", (int)y{j});"
        for j in range(len(real.sections))
    )
    decls = "\n".join(
        f"    dampctl_q s{j}[DAMPCTL_FX_Q{j}_STATES] = {{0}}; dampctl_q y{j};"
        for j in range(len(real.sections))
    )
    main = f"""#include <stdio.h>
#include "controller.h"
int main(void) {{
{decls}
    int v;
    while (scanf("%d", &v) == 1) {{
        dampctl_q x = (dampctl_q)v;
{calls}
        printf("\\n");
    }}
    return 0;
}}
"""
    (tmp_path / "controller.h").write_text(c_header(result))
    (tmp_path / "main.c").write_text(main)
    exe = tmp_path / "run"
    build = subprocess.run(
        [COMPILER, *STRICT, "-DDAMPCTL_REAL=float", "-o", str(exe), str(tmp_path / "main.c")],
        capture_output=True,
        text=True,
        timeout=60,
    )
    assert build.returncode == 0, build.stderr  # single precision and strict warnings: silent
    run = subprocess.run(
        [str(exe)], input=(tmp_path / "x.txt").read_text(), capture_output=True, text=True
    )
    got = np.array([line.split() for line in run.stdout.splitlines()], dtype=np.int64)
    assert got.shape == (n, len(real.sections))
    full = 2**15
    for j, secs in enumerate(real.sections):
        np.testing.assert_array_equal(got[:, j], run_fixed(secs, x))  # bit exact
        assert np.max(np.abs(got[:, j])) < full - 1  # no saturation
    scale = real.scaling
    command = sum(
        b.output_scale * got[:, j] / full for j, b in enumerate(scale.branches)
    )
    sensor = x / full * scale.input_full_scale
    float_real = result.realisations[0]
    ideal = sum(
        b.gain * scipy.signal.sosfilt(np.array(b.sos), sensor) for b in float_real.form.branches
    )
    error = np.std((command - ideal)[2000:])
    predicted = np.hypot(real.noise_rms, real.coefficient_error_rms)
    assert 0.5 * predicted < error < 1.5 * predicted


def test_export_files_names(plant):
    files = export_files(_result(plant), ["json", "c"])
    assert sorted(files) == ["controller.h", "controller.json"]


@needs_cc
def test_c_header_of_a_mimo_design_compiles_in_single_precision(tmp_path, plant):
    from dampctl.design import Design

    A = np.array([[-30.0, 400.0], [-400.0, -30.0]])
    design = Design(
        law="lqg",
        plant_fingerprint=plant.fingerprint,
        actuators=("f",),
        sensors=("x",),
        target_modes=(1,),
        controller=(A, np.array([[1.0], [0.5]]), np.array([[20.0, 5.0]]), np.zeros((1, 1))),
    )
    result = export_design(plant, design, RATE, fixed="q15", input_range=INPUT_RANGE)
    path = result.realisations[0]
    (tmp_path / "controller.h").write_text(c_header(result))
    (tmp_path / "main.c").write_text(
        '#include <stdio.h>\n#include "controller.h"\nint main(void) {\n'
        "    dampctl_real s[DAMPCTL_F__X_STATES] = {0};\n"
        "    for (int k = 0; k < 300; ++k)\n"
        '        printf("%.9g\\n", (double)dampctl_f__x_command(s, k == 0 ? 1.0f : 0.0f));\n'
        "    return 0;\n}\n"
    )
    exe = tmp_path / "run"
    build = subprocess.run(
        [COMPILER, *STRICT, "-DDAMPCTL_REAL=float", "-o", str(exe), str(tmp_path / "main.c")],
        capture_output=True,
        text=True,
        timeout=60,
    )
    assert build.returncode == 0, build.stderr
    got = np.array(
        subprocess.run([str(exe)], capture_output=True, text=True).stdout.split(), dtype=float
    )
    impulse = np.zeros(300)
    impulse[0] = 1.0
    want = -(
        path.form.feedthrough * impulse
        + sum(b.gain * scipy.signal.sosfilt(np.array(b.sos), impulse) for b in path.form.branches)
    )
    # single precision: float32 coefficient rounding (~6e-8 relative) moves a pole pair near
    # z = 1 by ∂θ/∂a1 = 1/(2 r sin θ) (Oppenheim & Schafer), and the phase error grows with
    # time: over 300 samples about 1e-4 of the peak; double (the default) is exact to 1e-12
    err = np.max(np.abs(got - want)) / np.max(np.abs(want))
    assert 1e-8 < err <= 1e-3


TWO_PAIRS = """title = "two loops whose names map to one C identifier"
[[modes]]
freq_hz = 20.0
damping = 0.01
[[modes]]
freq_hz = 55.0
damping = 0.01
[sites]
a = [1.0, 0.5]
b = [0.5, -1.0]
[[actuators]]
name = "fa"
kind = "force"
site = "a"
[[actuators]]
name = "fb"
kind = "force"
site = "b"
[[sensors]]
name = "va"
kind = "velocity"
site = "a"
[[sensors]]
name = "vb"
kind = "velocity"
site = "b"
[[pairs]]
name = "p-a"
actuator = "fa"
sensor = "va"
[[pairs]]
name = "p_a"
actuator = "fb"
sensor = "vb"
"""


def test_c_identifiers_are_distinct():
    from dampctl.discrete.writers import c_identifiers

    got = c_identifiers(["p-a", "p_a", "P_A", "1x", "p a"])
    assert got["p-a"] == "p_a" and got["1x"] == "_1x"
    assert len({v.upper() for v in got.values()}) == 5, got


@needs_cc
@pytest.mark.parametrize("fixed", ["none", "q15"])
def test_header_with_colliding_names_compiles(tmp_path, fixed):
    # 'p-a' and 'p_a' both map to the identifier p_a: the second becomes p_a_2, and the
    # header builds under -Wall -Werror (a duplicate definition would not)
    from dampctl.laws.dvf import design as dvf
    from dampctl.model.plantfile import parse_plant

    two = parse_plant(TWO_PAIRS)
    design = dvf(two, ["p-a", "p_a"])
    result = export_design(two, design, RATE, fixed=fixed, input_range=1e-2)
    header = c_header(result)
    assert "dampctl_p_a_command" in header and "dampctl_p_a_2_command" in header
    main = (
        '#include <stdio.h>\n#include "controller.h"\nint main(void) {\n'
        "    dampctl_real s1[DAMPCTL_P_A_STATES] = {0};\n"
        "    dampctl_real s2[DAMPCTL_P_A_2_STATES] = {0};\n"
        '    printf("%.9g %.9g\\n", (double)dampctl_p_a_command(s1, 1.0),'
        " (double)dampctl_p_a_2_command(s2, 1.0));\n"
        "    return 0;\n}\n"
    )
    got = _compile_and_run(tmp_path, header, main)
    # the first sample of each loop is its direct gain b0 (times the cascade gain), negated
    first = [-r.form.feedthrough - sum(b.gain * np.prod(np.asarray(b.sos)[:, 0])
                                      for b in r.form.branches)
             for r in result.realisations]
    np.testing.assert_allclose(got, first, rtol=1e-6, atol=1e-12)
