"""House rule: the package follows the job, and imports run one way.

model <- design <- analysis <- laws / discrete <- sizing <- report <- commands. A module may
import its own stage and the stages before it, never a later one. The imports are read from
the source with :mod:`ast` (module level and inside functions), so a lazy import counts too.
"""

import ast
from pathlib import Path

import pytest
from repo import ROOT

PACKAGE = ROOT / "dampctl"

#: rank of each stage; a module may import ranks <= its own, and among equal ranks only its own
#: stage. The shared utilities (errors, fileio, progress, schemas, tables) are rank 0: anyone
#: may use them.
RANK = {
    "errors": 0,
    "fileio": 0,
    "progress": 0,
    "values": 0,
    "schemas": 0,
    "tables": 0,
    "model": 1,
    "design": 2,
    "analysis": 3,
    "laws": 4,
    "discrete": 4,
    "sizing": 5,
    "report": 6,
    "commands": 7,
    "testing": 8,
}
#: the package root (``import dampctl``) re-exports the public API; a module inside may take
#: only the version string from it
ROOT_NAMES_ALLOWED = {"__version__"}


def stage_of(module: str) -> str:
    parts = module.split(".")
    assert parts[0] == "dampctl"
    return parts[1] if len(parts) > 1 else ""


def modules():
    for path in sorted(PACKAGE.rglob("*.py")):
        rel = path.relative_to(ROOT).with_suffix("")
        name = ".".join(rel.parts)
        if name.endswith(".__init__"):
            name = name[: -len(".__init__")]
        yield name, path


def imports_of(path: Path):
    """(imported module, names taken) for every dampctl import in a file."""
    tree = ast.parse(path.read_text(encoding="utf-8"))
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            for alias in node.names:
                if alias.name.split(".")[0] == "dampctl":
                    yield alias.name, ()
        elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            if node.module.split(".")[0] == "dampctl":
                yield node.module, tuple(a.name for a in node.names)


MODULES = [m for m in modules() if m[0] != "dampctl"]


def test_every_module_is_in_a_known_stage():
    unknown = sorted({stage_of(name) for name, _ in MODULES} - set(RANK) - {"__main__"})
    assert not unknown, f"modules outside the stages of the job: {unknown} (add them to RANK)"


@pytest.mark.parametrize(("name", "path"), MODULES, ids=[m[0] for m in MODULES])
def test_imports_run_one_way(name, path):
    stage = stage_of(name)
    if stage == "__main__":
        return
    wrong = []
    for target, names in imports_of(path):
        if target == "dampctl":
            extra = set(names) - ROOT_NAMES_ALLOWED
            if extra:
                wrong.append(f"dampctl ({', '.join(sorted(extra))}): import from the module")
            continue
        other = stage_of(target)
        if other == stage or RANK[other] == 0:
            continue
        if RANK[other] >= RANK[stage]:
            wrong.append(f"{target} (stage {other!r} is not before {stage!r})")
    assert not wrong, f"{name} imports a later stage: " + "; ".join(wrong)


def test_the_rule_catches_an_upward_import(tmp_path):
    # the check itself: a model module importing the analysis is flagged
    bad = tmp_path / "bad.py"
    bad.write_text("def f():\n    from dampctl.analysis.margins import loop_margins\n")
    found = list(imports_of(bad))
    assert found == [("dampctl.analysis.margins", ("loop_margins",))]
    assert RANK[stage_of(found[0][0])] > RANK["model"]


def test_no_module_grows_past_the_limit():
    # one idea per module: the layout's rule of thumb is about 600 lines; 800 is the hard stop
    long = {name: n for name, path in MODULES if (n := len(path.read_text().splitlines())) > 800}
    assert not long, f"modules past 800 lines (split them by idea): {long}"
