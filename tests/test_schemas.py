"""The shipped JSON Schemas: valid schemas, one for every document dampctl prints or writes,
and every bundled plant and every output of the demo and the commands validates against them
(with the ``jsonschema`` package, a test dependency)."""

from __future__ import annotations

import ast
import io
import json
import tomllib

import jsonschema
import pytest
from repo import PLANTS, ROOT

from dampctl.commands.cli import main
from dampctl.errors import UsageError
from dampctl.model import plantfile
from dampctl.schemas import load_schema, schema_names

#: schema name of each document ``format`` (dampctl-<kind>) that is not simply the kind
FORMAT_TO_SCHEMA = {"dampctl-discrete": "controller"}
OSCILLATOR = str(PLANTS / "oscillator.toml")


def schema_for(document: dict) -> str:
    fmt = document["format"]
    return FORMAT_TO_SCHEMA.get(fmt, fmt.removeprefix("dampctl-"))


def problems(document, name: str) -> list[str]:
    validator = jsonschema.Draft202012Validator(load_schema(name))
    return [
        f"{'/'.join(map(str, e.absolute_path)) or '(top)'}: {e.message}"
        for e in validator.iter_errors(document)
    ]


def assert_valid(document, name: str | None = None) -> None:
    name = name or schema_for(document)
    found = problems(document, name)
    assert not found, f"not valid against schema {name!r}:\n" + "\n".join(found[:10])


@pytest.mark.parametrize("name", schema_names())
def test_each_is_a_valid_draft_2020_12_schema(name):
    schema = load_schema(name)
    jsonschema.Draft202012Validator.check_schema(schema)
    assert schema["$id"] == f"urn:dampctl:schema:{name}:1"
    assert schema["title"] and schema["description"]


def test_unknown_name_lists_the_names():
    with pytest.raises(UsageError, match="choose one of: assessment, check"):
        load_schema("nope")


def _kinds_in_source() -> set[str]:
    """Every kind passed to print_json / json_text in the package, read from the source."""
    kinds = set()
    for path in (ROOT / "dampctl").rglob("*.py"):
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            if not isinstance(node, ast.Call):
                continue
            name = getattr(node.func, "id", getattr(node.func, "attr", ""))
            if name not in ("print_json", "json_text"):
                continue
            kind = node.args[-1] if node.args else None
            if isinstance(kind, ast.Constant) and isinstance(kind.value, str):
                kinds.add(kind.value)
    return kinds


def test_every_json_output_has_a_schema():
    kinds = _kinds_in_source()
    assert {"check", "sizing", "tune", "assessment", "export", "report", "demo"} <= kinds
    missing = sorted(k for k in kinds if k not in schema_names())
    assert not missing, (
        f"JSON outputs without a schema: {missing}; add dampctl/data/schemas/<kind>.json "
        "(DEVELOPERS.md, 'JSON Schemas')"
    )
    for kind in kinds:
        assert load_schema(kind)["properties"]["format"] == {
            "const": f"dampctl-{kind}",
            "description": "what the document is",
        }


# ---------------------------------------------------------------------- plant file
def test_plant_schema_names_exactly_the_keys_the_reader_accepts():
    """The reader refuses unknown keys, so the schema does too, and both list the same keys."""
    schema = load_schema("plant")
    assert set(schema["properties"]) == plantfile._TOP_KEYS
    for group, (required, optional) in plantfile._KEYS.items():
        row = schema["properties"][group]["items"]
        assert set(row["properties"]) == required | optional, group
        assert set(row["required"]) == required, group
        assert row["additionalProperties"] is False
    assert set(schema["properties"]["requirements"]["properties"]) == plantfile._REQUIREMENT_KEYS


BUNDLED = sorted(PLANTS.glob("*.toml")) + sorted((ROOT / "dampctl" / "data").glob("*.toml"))


@pytest.mark.parametrize("path", BUNDLED, ids=[p.name for p in BUNDLED])
def test_every_bundled_plant_is_valid(path):
    assert_valid(tomllib.loads(path.read_text(encoding="utf-8")), "plant")


@pytest.mark.parametrize(
    ("edit", "where"),
    [
        (lambda d: d["modes"][0].update(dampnig=0.01), "modes/0"),
        (lambda d: d["modes"][0].update(damping=1.0), "modes/0/damping"),
        (lambda d: d.pop("sites"), "(top)"),
        (lambda d: d["actuators"][0].update(kind="laser"), "actuators/0/kind"),
        (lambda d: d["requirements"].update(min_damping=0.0), "requirements/min_damping"),
    ],
)
def test_plant_schema_rejects_what_the_reader_rejects(edit, where):
    document = tomllib.loads((PLANTS / "oscillator.toml").read_text(encoding="utf-8"))
    edit(document)
    found = problems(document, "plant")
    assert found and found[0].startswith(where), found
    with pytest.raises(plantfile.PlantError):
        plantfile._build(document)


# ---------------------------------------------------------------------- outputs
def test_every_document_of_the_demo_is_valid(demo_run):
    assert demo_run.code in (0, 1), demo_run.err
    assert_valid(json.loads(demo_run.out), "demo")
    documents = sorted(demo_run.folder.rglob("*.json"))
    assert len(documents) == 5
    for path in documents:
        assert_valid(json.loads(path.read_text(encoding="utf-8")))
    assert_valid(tomllib.loads((demo_run.folder / "scanning_stage.toml").read_text()), "plant")


def _run(argv) -> dict:
    out, err = io.StringIO(), io.StringIO()
    code = main(argv, stdout=out, stderr=err)
    assert code in (0, 1), err.getvalue()
    return json.loads(out.getvalue())


@pytest.fixture(scope="module")
def designs(tmp_path_factory):
    folder = tmp_path_factory.mktemp("schemas")
    made = {}
    for law, pairs in (("dvf", "coil_vel"), ("ppf", "coil_gap"), ("lqg", "coil_vel")):
        path = folder / f"{law}.json"
        made[law] = (_run(["tune", OSCILLATOR, "--law", law, "--pairs", pairs, "-o", str(path),
                           "--json"]), path)
    return made


@pytest.mark.parametrize("law", ["dvf", "ppf", "lqg"])
def test_tune_output_and_design_file_are_valid(designs, law):
    printed, path = designs[law]
    assert_valid(printed, "tune")
    written = json.loads(path.read_text())
    assert_valid(written, "design")
    assert ("controller" in written) == (law == "lqg")  # both design forms are covered


@pytest.mark.parametrize(("law", "fixed"), [("dvf", "none"), ("dvf", "q15"), ("lqg", "none")])
def test_assess_export_and_report_outputs_are_valid(designs, law, fixed, tmp_path):
    design = str(designs[law][1])
    assert_valid(_run(["assess", OSCILLATOR, design, "--json"]), "assessment")
    exported = _run(["export", OSCILLATOR, design, "--fixed", fixed, "-o", str(tmp_path / "x"),
                     "--json"])
    assert_valid(exported, "export")
    controller = json.loads((tmp_path / "x" / "controller.json").read_text())
    assert_valid(controller, "controller")
    assert_valid(_run(["report", OSCILLATOR, design, "-o", str(tmp_path / "r.html"), "--json"]),
                 "report")


@pytest.mark.parametrize(("plant", "law"), [("oscillator", "dvf"), ("light_truss", "iff")])
def test_check_and_size_outputs_are_valid(plant, law):
    path = str(PLANTS / f"{plant}.toml")
    assert_valid(_run(["check", path, "--json"]), "check")
    assert_valid(_run(["size", path, "--law", law, "--max-pairs", "1", "--json"]), "sizing")


def test_a_document_missing_a_required_key_is_invalid(designs):
    printed = dict(designs["dvf"][0])
    del printed["target_met"]
    assert problems(printed, "tune") == ["(top): 'target_met' is a required property"]
    printed = dict(designs["dvf"][0], stable="yes")
    assert problems(printed, "tune") == ["stable: 'yes' is not of type 'boolean'"]


def test_schema_command_prints_one_and_lists_them():
    out = io.StringIO()
    assert main(["schema", "design"], stdout=out) == 0
    assert json.loads(out.getvalue()) == load_schema("design")
    out = io.StringIO()
    assert main(["schema"], stdout=out) == 0
    assert [line.split()[0] for line in out.getvalue().splitlines()] == list(schema_names())
    err = io.StringIO()
    assert main(["schema", "plnat"], stdout=io.StringIO(), stderr=err) == 2
    assert "no schema named 'plnat'" in err.getvalue()


def test_plant_new_output_and_starter_file_are_valid(tmp_path):
    target = tmp_path / "starter.toml"
    assert_valid(_run(["plant", "new", "-o", str(target), "--json"]), "plant-new")
    assert_valid(tomllib.loads(target.read_text(encoding="utf-8")), "plant")


def test_passive_designs_and_their_outputs_are_valid(tmp_path):
    truss = str(PLANTS / "light_truss.toml")
    stage = str(PLANTS / "scanning_stage.toml")
    runs = {
        "shunt": [truss, "--law", "shunt", "--modes", "1", "--pairs", "iff_1", "--no-refine"],
        "tmd": [stage, "--law", "tmd", "--modes", "4,5", "--site", "stage_x,stage_y"],
        "viscous": [stage, "--law", "viscous", "--modes", "4,5", "--between", "coil_x1,ground",
                    "--between", "coil_y1,ground", "--mount-stiffness", "2e6"],
    }
    for law, argv in runs.items():
        path = tmp_path / f"{law}.json"
        assert_valid(_run(["tune", *argv, "-o", str(path), "--json"]), "tune")
        assert_valid(json.loads(path.read_text()), "design")
        assert_valid(_run(["assess", argv[0], str(path), "--json", "--samples", "2"]),
                     "assessment")
        printed = _run(["export", argv[0], str(path), "-o", str(tmp_path / law), "--json"])
        assert_valid(printed, "parts")
        assert_valid(json.loads((tmp_path / law / "parts.json").read_text()), "parts")
