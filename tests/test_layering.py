"""The house plan: every module sits in a stage, and no module imports from a stage above its own.

The stage order is the data flow (DEVELOPERS.md): common → inputs → physics → engine → products →
pipeline, demo → live → the command line. A module may import its own stage and those below it,
at the top of the file or inside a function alike (common practice: a layered design keeps its
dependency graph acyclic and one-directional).

The physics stage is typed: every public function and method of its modules has a hint on each
parameter and on its return (issue 18, item 7), so the kinds the formulas take and give back
(tunnelred.common._arraylike) are written where a reader and a type checker see them.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parents[1] / "tunnelred"

#: Stage of each subpackage; a higher number may import a lower one, never the reverse.
STAGES = {
    "common": 0,
    "inputs": 1,
    "physics": 2,
    "engine": 3,
    "products": 4,
    "pipeline": 5,
    "demo": 5,
    "live": 6,
}
TOP = 7  # tunnelred/cli.py, tunnelred/__main__.py


def _stage_of_module(path: Path) -> int:
    parts = path.relative_to(PACKAGE).parts
    return STAGES[parts[0]] if len(parts) > 1 else TOP


def _imported_stages(path: Path) -> list[tuple[int, str, int]]:
    """(line, dotted name, stage) of every tunnelred import in ``path``."""
    tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
    package_parts = ("tunnelred", *path.relative_to(PACKAGE).parent.parts)
    found = []
    for node in ast.walk(tree):
        names: list[str] = []
        if isinstance(node, ast.Import):
            names = [alias.name for alias in node.names]
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = package_parts[: len(package_parts) - node.level + 1]
                module = ".".join((*base, node.module)) if node.module else ".".join(base)
            else:
                module = node.module or ""
            names = [module] if node.module or node.level else []
            if module == "tunnelred":  # from tunnelred import x: x is the stage
                names = [f"tunnelred.{alias.name}" for alias in node.names]
        for name in names:
            parts = name.split(".")
            if parts[0] != "tunnelred" or len(parts) < 2 or parts[1] == "__version__":
                continue
            stage = STAGES.get(parts[1], TOP)
            found.append((node.lineno, name, stage))
    return found


MODULES = sorted(PACKAGE.rglob("*.py"))


def test_every_module_is_in_a_stage():
    for path in MODULES:
        parts = path.relative_to(PACKAGE).parts
        assert len(parts) == 1 or parts[0] in STAGES, f"{path} is in no stage"
    top = {p.name for p in MODULES if p.parent == PACKAGE}
    assert top <= {"__init__.py", "__main__.py", "cli.py"}, top


@pytest.mark.parametrize("path", MODULES, ids=lambda p: str(p.relative_to(PACKAGE)))
def test_no_import_from_a_higher_stage(path):
    own = _stage_of_module(path)
    above = [(line, name) for line, name, stage in _imported_stages(path) if stage > own]
    assert not above, f"{path.relative_to(PACKAGE)} imports from a higher stage: {above}"


def test_the_checker_sees_an_upward_import(tmp_path):
    # The checker must fail on a violation, or the test above could never fail: a physics
    # module that imports the report, written where a physics module would stand.
    fake = PACKAGE / "physics" / "_layering_probe.py"
    fake.write_text("from tunnelred.products import report\nfrom ..engine import quality\n")
    try:
        found = _imported_stages(fake)
    finally:
        fake.unlink()
    assert [(name, stage) for _, name, stage in found] == [
        ("tunnelred.products", STAGES["products"]),
        ("tunnelred.engine", STAGES["engine"]),
    ]
    assert all(stage > _stage_of_module(fake) for _, _, stage in found)


#: Every module of the physics stage, its subpackages' too: none is exempt.
PHYSICS = sorted((PACKAGE / "physics").rglob("*.py"))


def _missing_hints(source: str) -> list[str]:
    """``function: parameter`` (or ``function: return``) for every missing hint of a public
    function, or of a public method of a public class, at the top level of ``source``."""
    missing = []

    def check(body: list[ast.stmt], prefix: str, method: bool) -> None:
        for node in body:
            if isinstance(node, ast.ClassDef) and not node.name.startswith("_"):
                check(node.body, f"{node.name}.", True)
            if not isinstance(node, ast.FunctionDef | ast.AsyncFunctionDef):
                continue
            if node.name.startswith("_"):
                continue
            a = node.args
            params = [*a.posonlyargs, *a.args, *a.kwonlyargs, a.vararg, a.kwarg]
            params = [p for p in params if p is not None]
            if method and params and params[0].arg in ("self", "cls"):
                params = params[1:]
            name = prefix + node.name
            missing.extend(f"{name}: {p.arg}" for p in params if p.annotation is None)
            if node.returns is None:
                missing.append(f"{name}: return")

    check(ast.parse(source).body, "", False)
    return missing


@pytest.mark.parametrize("path", PHYSICS, ids=lambda p: str(p.relative_to(PACKAGE)))
def test_every_public_physics_function_is_typed(path):
    missing = _missing_hints(path.read_text(encoding="utf-8"))
    assert not missing, f"{path.relative_to(PACKAGE)} lacks type hints: {missing}"


def test_the_hint_checker_sees_a_missing_hint():
    # The checker must fail on an untyped function, or the test above could never fail.
    source = (
        "def typed(x: float, *, y: int = 0) -> float: ...\n"
        "def untyped(x, *args: int, y=1): ...\n"
        "def _private(x): ...\n"
        "class Result:\n"
        "    def method(self, z) -> None: ...\n"
        "    @property\n"
        "    def size(self): ...\n"
        "    def _helper(self, w): ...\n"
        "class _Hidden:\n"
        "    def method(self, v): ...\n"
    )
    assert _missing_hints(source) == [
        "untyped: x",
        "untyped: y",
        "untyped: return",
        "Result.method: z",
        "Result.size: return",
    ]
