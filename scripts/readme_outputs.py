"""Refresh the command outputs shown in the README walkthrough.

Runs each walkthrough command on the bundled stage plant in a temporary folder and writes its
output (abridged where long) between the ``<!-- begin NAME -->`` / ``<!-- end NAME -->``
markers of README.md, so the README shows what a user will see. Run from the repository root:
``python scripts/readme_outputs.py``.
"""

from __future__ import annotations

import contextlib
import io
import os
import re
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

from dampctl.commands.cli import main  # noqa: E402

API_CODE = '''import dampctl
from dampctl.discrete.export import export_design
from dampctl.laws import dvf

plant = dampctl.load_plant("plants/scanning_stage.toml")
print(plant.n_modes, "modes, first at", round(plant.freqs_hz[0], 1), "Hz")

# frequency response from the modal sum: shape (n_out, n_in, n_freq)
H = plant.frf([100.0, 222.85, 1000.0], ["coil_x1"], ["vel_x1"])
print(abs(H[0, 0]))

design = dvf.design(plant, ["vx1", "vy1"])  # tuned to the plant's requirements
print([round(loop.gain, 1) for loop in design.loops], "N/(m/s)")

result = dampctl.assess(plant, design)
for row in result.to_dict()["modes"][3:6]:
    print(row["mode"], round(row["open_damping"], 4), "->", round(row["closed_damping"], 4))
print("all requirements met:", result.all_met)

exported = export_design(plant, design, 20000.0, fixed="q15")
print(exported.controller.loops[0].sos)
'''


def _run(argv: list[str], keep: int | None = None) -> str:
    out, err = io.StringIO(), io.StringIO()
    main(argv, stdout=out, stderr=err)
    lines = [ln for ln in out.getvalue().rstrip().splitlines() if not ln.startswith("Safety")
             and not ln.startswith("Verify the loop")]
    while lines and not lines[-1].strip():
        lines.pop()
    if keep is not None and len(lines) > keep:
        lines = [*lines[:keep], "..."]
    return "\n".join(lines)


def main_script() -> None:
    readme = ROOT / "README.md"
    text = readme.read_text(encoding="utf-8")
    plant = str(ROOT / "plants" / "scanning_stage.toml")
    blocks = {}
    commands = {
        "check": ["check", plant],
        "size": ["size", plant],
        "tune": ["tune", plant, "--law", "dvf", "--pairs", "vx1,vy1", "-o", "design.json"],
        "assess": ["assess", plant, "design.json", "--plots", "plots"],
        "export": ["export", plant, "design.json", "--fixed", "q15", "-o", "export"],
        # passive, shaping or active? (only the comparison is shown)
        "_tmd": ["tune", plant, "--law", "tmd", "--modes", "4,5", "--site", "stage_x,stage_y",
                 "--mass-ratio", "0.05", "-o", "tmd.json"],
        "_viscous": ["tune", plant, "--law", "viscous", "--modes", "4,5,6", "--between",
                     "coil_x1,ground", "--between", "coil_y1,ground", "--mount-stiffness", "2e6",
                     "-o", "viscous.json"],
        "_shape": ["shape", plant, "--modes", "2,4", "--kind", "zvd", "-o", "zvd.json"],
        "compare": ["compare", plant, "tmd.json", "viscous.json", "design.json", "--names",
                    "tmd,viscous,dvf", "--shaper", "zvd.json", "--move", "1e-6", "--drive",
                    "coil_x1", "--output", "probe_x"],
    }
    with tempfile.TemporaryDirectory() as tmp:
        cwd = os.getcwd()
        os.chdir(tmp)
        try:
            for name, argv in commands.items():
                shown = " ".join(argv).replace(plant, "plants/scanning_stage.toml")
                blocks[name] = f"```\n$ dampctl {shown}\n{_run(argv)}\n```"
        finally:
            os.chdir(cwd)
    buf = io.StringIO()
    with contextlib.redirect_stdout(buf):
        os.chdir(ROOT)
        exec(compile(API_CODE, "walkthrough", "exec"), {})
    blocks["api_output"] = f"```\n{buf.getvalue().rstrip()}\n```"
    blocks["api_code"] = f"```python\n{API_CODE.rstrip()}\n```"
    for name, body in blocks.items():
        if name.startswith("_"):
            continue  # run for what follows, not shown
        body = body.replace(plant, "plants/scanning_stage.toml")
        pattern = re.compile(rf"(<!-- begin {name} -->\n).*?(<!-- end {name} -->)", re.S)
        if not pattern.search(text):
            raise SystemExit(f"README.md has no markers for {name}")
        text = pattern.sub(lambda m, b=body: m.group(1) + b + "\n" + m.group(2), text)
    readme.write_text(text, encoding="utf-8")
    print("README.md walkthrough outputs refreshed")


if __name__ == "__main__":
    main_script()
