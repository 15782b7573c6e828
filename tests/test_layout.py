"""The package's layout: each stage imports only what its docstring allows, no cycles."""
from __future__ import annotations

import ast
from pathlib import Path

PACKAGE = Path(__file__).resolve().parent.parent / "reportgen"
SHARED = {"reportgen", "reportgen.model", "reportgen.errors", "reportgen.units",
          "reportgen.interrupt"}
# What each stage may import besides itself and SHARED (from the stage docstrings).
ALLOWED = {
    "inputs": set(),
    "engine": set(),
    "report": {"inputs", "engine"},
    "pdf": set(),
    "export": {"engine"},
    "archive": {"engine", "export", "pdf"},
}


def _imports(path: Path) -> set[str]:
    found: set[str] = set()
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.ImportFrom) and node.module and node.module.startswith("reportgen"):
            found.add(node.module)
            # "from reportgen.inputs import catalogs" imports the module reportgen.inputs.catalogs
            found.update(f"{node.module}.{alias.name}" for alias in node.names
                         if (PACKAGE.parent / node.module.replace(".", "/") / f"{alias.name}.py").exists())
        elif isinstance(node, ast.Import):
            found.update(alias.name for alias in node.names if alias.name.startswith("reportgen"))
    return found


def test_every_stage_imports_only_what_it_may():
    wrong = []
    for stage, others in ALLOWED.items():
        allowed_prefixes = {f"reportgen.{name}" for name in others | {stage}}
        for path in sorted((PACKAGE / stage).glob("*.py")):
            for module in _imports(path):
                if module in SHARED or ".".join(module.split(".")[:2]) in allowed_prefixes:
                    continue
                wrong.append(f"{path.relative_to(PACKAGE.parent)} imports {module}")
    assert wrong == []


def test_package_imports_are_absolute():
    # Relative imports would hide a module's stage from the checks above.
    relative = [f"{path.relative_to(PACKAGE.parent)}:{node.lineno}"
                for path in PACKAGE.rglob("*.py")
                for node in ast.walk(ast.parse(path.read_text(encoding="utf-8")))
                if isinstance(node, ast.ImportFrom) and node.level]
    assert relative == []


def test_shared_modules_import_no_stage():
    for name in ("model", "errors", "units", "interrupt"):
        for module in _imports(PACKAGE / f"{name}.py"):
            assert module in SHARED, f"reportgen/{name}.py imports {module}"


def test_no_import_cycles_between_modules():
    modules = {}
    for path in PACKAGE.rglob("*.py"):
        dotted = ".".join(path.relative_to(PACKAGE.parent).with_suffix("").parts)
        modules[dotted.removesuffix(".__init__")] = path
    graph = {name: {m for m in _imports(path) if m in modules and m != name}
             for name, path in modules.items()}
    state: dict[str, int] = {}

    def visit(name: str, trail: list[str]) -> None:
        state[name] = 1
        for target in sorted(graph[name]):
            if state.get(target) == 1:
                raise AssertionError(" -> ".join(trail + [name, target]))
            if target not in state:
                visit(target, trail + [name])
        state[name] = 2

    for name in sorted(graph):
        if name not in state:
            visit(name, [])


def test_every_stage_says_what_it_may_import():
    for stage in ALLOWED:
        text = (PACKAGE / stage / "__init__.py").read_text(encoding="utf-8")
        assert "May import:" in text, stage
