"""`dampctl demo` end to end, and `dampctl report` on a design that misses a requirement."""

from __future__ import annotations

import io
import json

from dampctl.commands.cli import main
from dampctl.model.plantfile import dump_plant
from dampctl.testing import chain_plant

PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"


def _run(argv):
    out, err = io.StringIO(), io.StringIO()
    code = main(argv, stdout=out, stderr=err)
    return code, out.getvalue(), err.getvalue()


def test_demo_runs_the_whole_job_inside_its_folder(demo_run):
    folder = demo_run.folder
    code, out, err = demo_run.code, demo_run.out, demo_run.err
    assert code in (0, 1), err
    summary = json.loads(out)
    for name in ("scanning_stage.toml", "check.json", "sizing.json", "design.json",
                 "assessment.json", "report.html"):
        assert (folder / name).is_file(), name
    exported = sorted(p.name for p in (folder / "export").iterdir())
    assert exported == ["controller.h", "controller.json", "sections.csv"]
    pngs = list((folder / "plots").glob("*.png"))
    assert len(pngs) >= 6
    for png in pngs:
        assert png.read_bytes()[:8] == PNG_SIGNATURE, png.name
    # nothing lands outside the folder
    assert sorted(p.name for p in folder.parent.iterdir()) == ["demo"]
    html = (folder / "report.html").read_text(encoding="utf-8")
    for heading in ("Plant", "Sizing: how many pairs", "Design", "Closed-loop modes",
                    "Stability margins", "Requirements", "Discrete-time export", "Safety."):
        assert heading in html, heading
    # the summary speaks of the design that was written
    design = json.loads((folder / "design.json").read_text())
    assert summary["law"] == design["law"] and summary["pairs"] == design["pairs"]
    assert all(m["closed_damping"] > m["open_damping"] for m in summary["modes"])
    assert (code == 0) == summary["all_met"]
    # every JSON document says what it is and which layout version it has
    assert (summary["format"], summary["version"]) == ("dampctl-demo", 1)
    for name, kind in (("check.json", "check"), ("sizing.json", "sizing"),
                       ("design.json", "design"), ("assessment.json", "assessment"),
                       ("export/controller.json", "discrete")):
        document = json.loads((folder / name).read_text())
        assert document["format"] == f"dampctl-{kind}", name
        assert document["version"] == 1, name


def test_demo_refuses_an_existing_folder(tmp_path):
    folder = tmp_path / "taken"
    folder.mkdir()
    code, _out, err = _run(["demo", "-o", str(folder)])
    assert code == 2
    assert "already exists" in err and err.count("\n") == 1
    assert list(folder.iterdir()) == []


def test_report_shows_a_missed_requirement(tmp_path):
    # Two-mass chain with a damping requirement a small fixed DVF gain cannot reach.
    plant = chain_plant([1.0, 0.5], [5e5, 2e5], damping=0.01)
    text = dump_plant(plant) + "\n[requirements]\nmodes = [1, 2]\nmin_damping = 0.2\n"
    plant_file = tmp_path / "chain.toml"
    plant_file.write_text(text)
    design_file = tmp_path / "design.json"
    code, _, err = _run(["tune", str(plant_file), "--law", "dvf", "--pairs", "p1",
                         "--gain", "5", "-o", str(design_file)])
    assert code == 1, err  # target not met by the fixed gain
    report = tmp_path / "report.html"
    code, out, err = _run(["report", str(plant_file), str(design_file), "-o", str(report)])
    assert code == 1
    html = report.read_text(encoding="utf-8")
    assert "Requirements not met: min_damping" in html
    assert "NOT MET" in html
    assert "requirements not met: min_damping" in out
    # the top records how the report was made: the command line and the inputs' digests
    import hashlib

    top = html.split("Safety.")[0]
    assert f"dampctl report {plant_file} {design_file} -o {report}" in top
    assert hashlib.sha256(plant_file.read_bytes()).hexdigest()[:16] in top
    assert hashlib.sha256(design_file.read_bytes()).hexdigest()[:16] in top
    # SVG figures embedded on request; pdf is for --plots folders only
    svg = tmp_path / "svg.html"
    code, _, err = _run(["report", str(plant_file), str(design_file), "-o", str(svg),
                         "--figure-format", "svg"])
    assert code == 1, err
    text = svg.read_text(encoding="utf-8")
    assert "data:image/svg+xml;base64," in text and "data:image/png" not in text
    code, _, err = _run(["report", str(plant_file), str(design_file), "-o",
                         str(tmp_path / "pdf.html"), "--figure-format", "pdf"])
    assert code == 2 and "invalid choice" in err


def test_report_refuses_to_overwrite_its_input(tmp_path):
    plant = chain_plant([1.0, 0.5], [5e5, 2e5], damping=0.01)
    plant_file = tmp_path / "chain.toml"
    plant_file.write_text(dump_plant(plant))
    design_file = tmp_path / "design.json"
    assert _run(["tune", str(plant_file), "--law", "dvf", "--pairs", "p1", "--gain", "5",
                 "-o", str(design_file)])[0] in (0, 1)
    before = design_file.read_bytes()
    code, _, err = _run(["report", str(plant_file), str(design_file), "-o", str(design_file)])
    assert code == 2 and "input" in err
    assert design_file.read_bytes() == before


def test_report_refuses_a_design_file_as_export_summary(tmp_path):
    plant = chain_plant([1.0, 0.5], [5e5, 2e5], damping=0.01)
    plant_file = tmp_path / "chain.toml"
    plant_file.write_text(dump_plant(plant))
    design_file = tmp_path / "design.json"
    assert _run(["tune", str(plant_file), "--law", "dvf", "--pairs", "p1", "--gain", "5",
                 "-o", str(design_file)])[0] in (0, 1)
    code, _, err = _run(["report", str(plant_file), str(design_file), "-o",
                         str(tmp_path / "r.html"), "--export", str(design_file)])
    assert code == 2 and "is not an export summary" in err
    assert not (tmp_path / "r.html").exists()
