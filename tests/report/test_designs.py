"""Several designs in one report: each design's numbers are its own assessment's."""

from __future__ import annotations

import io
import re
from dataclasses import replace

import pytest

from dampctl.analysis.assessment import assess
from dampctl.commands.cli import main
from dampctl.design import Branch, Design, Loop
from dampctl.model.components import Disturbance, Output, Requirements
from dampctl.model.plantfile import dump_plant
from dampctl.report.designs import designs_report
from dampctl.testing import sdof_plant


def _plant():
    base = sdof_plant(2.0, 8e4, 8.0)
    return replace(base, disturbances=(Disturbance("w", "x", 1e-2),),
                   outputs=(Output("xo", "displacement", "x"),),
                   requirements=Requirements(modes=(1,), min_damping=0.05,
                                             loop_delay_s=1e-4))


def _design(plant, gain):
    return Design(law="dvf", plant_fingerprint=plant.fingerprint, actuators=("f",),
                  sensors=("v",), target_modes=(1,),
                  loops=(Loop("fv", "f", "v", gain, (Branch(gain=gain),)),), pairs=("fv",))


def _plain(text: str) -> str:
    return re.sub(r'<span class="num">([^<]*)</span>', r"\1", text)


def test_each_design_shows_its_own_assessment():
    plant = _plant()
    designs = [("low", _design(plant, 20.0)), ("high", _design(plant, 150.0))]
    text, results = designs_report(plant, designs)
    text = _plain(text)
    for (name, design), result in zip(designs, results, strict=True):
        again = assess(plant, design)
        assert result.modes[0].closed_damping == pytest.approx(again.modes[0].closed_damping)
        # its damping and margins are in the tables, with its name
        assert f"<td>{result.modes[0].closed_damping:.4g}</td>" in text
        assert f"<td>{result.loops[0].phase_margin_deg:.4g}</td>" in text
        assert f'<td class="text">{name}</td>' in text
    # the low gain misses the damping requirement, the high one meets it
    assert results[0].modes[0].closed_damping < 0.05 < results[1].modes[0].closed_damping
    assert "NOT MET: min_damping" in text and "every requirement met" in text
    assert text.count("<img ") == 2  # FRF overlay at xo, damping bars


def test_report_command_with_several_designs(tmp_path):
    plant = _plant()
    plant_path = tmp_path / "p.toml"
    plant_path.write_text(dump_plant(plant), encoding="utf-8")
    paths = []
    for name, gain in (("a", 20.0), ("b", 150.0)):
        path = tmp_path / f"{name}.json"
        path.write_text(_design(plant, gain).to_json(), encoding="utf-8")
        paths.append(str(path))
    out, err = io.StringIO(), io.StringIO()
    page = tmp_path / "r.html"
    code = main(["report", str(plant_path), *paths, "-o", str(page)], stdout=out, stderr=err)
    assert code == 1, err.getvalue()  # design a misses min_damping
    assert "a: min_damping" in out.getvalue()
    text = page.read_text(encoding="utf-8")
    assert "Verdict per design" in text and "b.json" in text  # provenance lists both
    err = io.StringIO()
    code = main(["report", str(plant_path), *paths, "-o", str(tmp_path / "x.html"),
                 "--sizing", paths[0]], stdout=io.StringIO(), stderr=err)
    assert code == 2 and "--sizing belongs to a report of one design" in err.getvalue()
    code = main(["report", str(plant_path), *(paths * 4), "-o", str(tmp_path / "y.html")],
                stdout=io.StringIO(), stderr=(err := io.StringIO()))
    assert code == 2 and "at most 6 designs" in err.getvalue()
    assert not (tmp_path / "y.html").exists()
