"""The package's import layering: stages import only stages below them, and no module cycle.

The rules (recorded in DEVELOPERS.md, "Layers"): each top-level module or
package of ``codebench`` sits in one stage; a module may import its own
package and any lower stage, never a higher one, including imports inside
functions; and the module import graph has no cycle. The foundation
(``records``, ``layout``, ``options``, ``errors``, ``stats``) imports nothing
of codebench above it, so every stage can share its records. (Common
practice for layered architectures; checked from the source with ``ast``.)
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

PACKAGE = Path(__file__).parents[1] / "codebench"

#: Stage of each top-level module or package, lowest first (the foundation is ordered within stage 0).
STAGES: dict[str, float] = {
    "errors": 0.0, "files": 0.05, "stats": 0.1, "layout": 0.2, "options": 0.3, "records": 0.4,
    "circuits": 1,
    "codes": 2,
    "noise": 3,
    "decoders": 4,
    "build": 5, "qasm": 5.5,
    "results": 6,
    "engine": 7,
    "config": 8, "pointspec": 8.5,
    "analysis": 9,
    "api": 10, "lab": 10.25,
    "figures": 10.5,
    "testing": 11,
    "forecast": 12,
    "tables": 13,
    "report": 14,
    "cli_args": 14.5, "cli_lab": 14.7, "cli_device": 14.7,
    "cli": 15,
    "__init__": 16, "__main__": 16, "launch": 16,
}


def module_name(path: Path) -> str:
    parts = list(path.relative_to(PACKAGE.parent).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


def modules() -> dict[str, Path]:
    return {module_name(path): path for path in sorted(PACKAGE.rglob("*.py"))}


def imports(path: Path, known: set[str]) -> set[str]:
    """The codebench modules ``path`` imports (anywhere in the file), resolved to module names."""
    out: set[str] = set()
    for node in ast.walk(ast.parse(path.read_text())):
        if isinstance(node, ast.Import):
            out |= {alias.name for alias in node.names if alias.name.startswith("codebench")}
        elif isinstance(node, ast.ImportFrom) and node.module and node.module.startswith("codebench"):
            for alias in node.names:
                full = f"{node.module}.{alias.name}"
                out.add(full if full in known else node.module)
    return out


def stage(module: str) -> tuple[str, float]:
    parts = module.split(".")
    top = parts[1] if len(parts) > 1 else "__init__"
    assert top in STAGES, f"{module} is in no stage: add '{top}' to STAGES here and to DEVELOPERS.md"
    return top, STAGES[top]


def test_every_module_has_a_stage() -> None:
    for module in modules():
        stage(module)


def test_no_import_runs_up_the_stages() -> None:
    known = set(modules())
    wrong = []
    for module, path in modules().items():
        top, level = stage(module)
        for target in imports(path, known):
            other, other_level = stage(target)
            if other != top and other_level >= level and top not in ("__init__", "__main__"):
                wrong.append(f"{module} (stage {level}) imports {target} (stage {other_level})")
    assert not wrong, "imports against the layering:\n" + "\n".join(wrong)


def test_foundation_imports_only_foundation() -> None:
    known = set(modules())
    for module, path in modules().items():
        if stage(module)[1] < 1:
            assert all(stage(target)[1] < 1 for target in imports(path, known)), module


def test_no_module_import_cycle() -> None:
    known = set(modules())
    graph = {module: imports(path, known) & known for module, path in modules().items()}
    # A package's __init__ re-exporting its own modules is not a cycle of the design; a module
    # importing its package's __init__ while that __init__ imports it is.
    seen: dict[str, int] = {}
    stack: list[str] = []
    cycles: list[list[str]] = []

    def visit(node: str) -> None:
        seen[node] = 1
        stack.append(node)
        for nxt in sorted(graph[node]):
            if seen.get(nxt) == 1:
                cycles.append(stack[stack.index(nxt):] + [nxt])
            elif nxt not in seen:
                visit(nxt)
        stack.pop()
        seen[node] = 2

    for node in sorted(graph):
        if node not in seen:
            visit(node)
    assert not cycles, "import cycles:\n" + "\n".join(" -> ".join(c) for c in cycles)


@pytest.mark.parametrize("limit", [520])
def test_no_module_is_too_long(limit: int) -> None:
    # One job per module; about 500 lines is where a module has started doing two.
    long = {module: n for module, path in modules().items() if (n := len(path.read_text().splitlines())) > limit}
    assert not long, f"modules over {limit} lines: {long}"
