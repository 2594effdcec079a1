"""The house draws one way: the physics core at the bottom imports no rule and no engine;
the rules import only the core and the contract; the engines import both; the command
line imports everything and nothing imports it (issue: one core, two engines)."""
from __future__ import annotations

import ast
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent

ALLOWED = {
    "roundtrip": {"roundtrip"},
    "allocation": {"allocation", "roundtrip"},
    "batchrounds": {"batchrounds", "allocation", "roundtrip"},
    "peak": {"peak", "allocation", "roundtrip"},
}


def _imports(path: Path):
    tree = ast.parse(path.read_text(encoding="utf-8"))
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            for a in node.names:
                yield a.name, node.lineno
        elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            yield node.module, node.lineno


def _modules(package: str):
    return sorted((ROOT / package).rglob("*.py")) if (ROOT / package).is_dir() else []


def test_each_layer_imports_only_the_layers_below_it():
    ours = set(ALLOWED) | {"experiments"}
    for package, allowed in ALLOWED.items():
        for path in _modules(package):
            for name, line in _imports(path):
                top = name.split(".")[0]
                assert top not in ours or top in allowed, f"{path.relative_to(ROOT)}:{line} imports {name}"


def test_rules_import_no_engine_and_no_private_core_module():
    for path in _modules("allocation"):
        for name, line in _imports(path):
            parts = name.split(".")
            assert not (parts[0] == "roundtrip" and any(p.startswith("_") for p in parts[1:])), \
                f"{path.relative_to(ROOT)}:{line} imports the private {name}"


def test_nothing_imports_the_command_line():
    for package in (*ALLOWED, "experiments"):
        for path in _modules(package):
            if path.parent.name == "cli" and path.parent.parent.name == "experiments":
                continue
            for name, line in _imports(path):
                assert not name.startswith("experiments.cli"), \
                    f"{path.relative_to(ROOT)}:{line} imports {name}"
