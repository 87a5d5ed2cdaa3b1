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


def _result(plant, fixed="none", freqs=(120.0, 135.0)):
    design = ppf_bank(freqs, fingerprint=plant.fingerprint, gain=0.3, damping=0.2)
    return export_design(plant, design, RATE, fixed=fixed)


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
    result = _result(plant, fixed="q31")
    rows = list(csv.DictReader(io.StringIO(sections_csv(result))))
    real = result.realisations[0]
    assert len(rows) == sum(len(b.sos) for b in real.form.branches)
    first = real.form.branches[0]
    assert float(rows[0]["a1"]) == first.sos[0, 4]
    assert float(rows[0]["cascade_gain"]) == first.gain
    fixed = result.fixed_realisations[0].sections[0][0]
    assert int(rows[0]["a1_int"]) == fixed.integers[3]
    assert int(rows[0]["frac_bits"]) == fixed.frac_bits == 30


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


@needs_cc
def test_c_fixed_routine_matches_integer_model_and_sosfilt(tmp_path, plant):
    result = _result(plant, fixed="q15", freqs=(900.0,))
    real = result.fixed_realisations[0]
    sections = real.sections[0]
    n = 600
    main = f"""#include <stdio.h>
#include "controller.h"
int main(void) {{
    dampctl_q state[DAMPCTL_FX_Q0_STATES] = {{0}};
    for (int k = 0; k < {n}; ++k)
        printf("%d\\n", (int)dampctl_fx_q_branch0(state, k == 0 ? 8000 : 0));
    return 0;
}}
"""
    got = np.array(_compile_and_run(tmp_path, c_header(result), main))
    x = np.zeros(n, dtype=np.int64)
    x[0] = 8000
    np.testing.assert_array_equal(got, run_fixed(sections, x))  # bit exact
    sos = np.array([s.sos for s in sections])
    ref = scipy.signal.sosfilt(sos, x.astype(float))
    assert np.max(np.abs(ref)) < 2**15 - 1
    # rounding bound: ½ LSB per section output, through 1/A_k and the later sections
    imp = np.zeros(5000)
    imp[0] = 1.0
    bound = sum(
        0.5
        * np.sum(
            np.abs(scipy.signal.sosfilt(np.array([[1.0, 0, 0, *sos[k, 3:]], *sos[k + 1 :]]), imp))
        )
        for k in range(len(sos))
    )
    assert np.max(np.abs(got - ref)) <= bound


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
    result = export_design(plant, design, RATE, fixed="q15")
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
        [
            COMPILER,
            "-std=c99",
            "-Wall",
            "-Werror",
            "-DDAMPCTL_REAL=float",
            "-o",
            str(exe),
            str(tmp_path / "main.c"),
        ],
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
