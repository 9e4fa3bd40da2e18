"""The package's layers: each folder of `agree/` is a layer and imports only from the layers below.

Every import in every module is read with `ast`, those inside functions included (a lazy import
is still a dependency). Three rules:

1. an import may not run up a layer (`agree.stats` may not import `agree.analysis`), nor sideways
   between the two middle layers that stand on `core` alone (`io` and `stats`);
2. a module may not import a private name (one starting with ``_``) of another module;
3. no module imports the package root `agree` (it only re-exports).
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parents[1] / "agree"

# Layer of each folder, and the layers each may import from (besides itself).
MAY_IMPORT = {
    "core": set(),
    "io": {"core"},
    "stats": {"core"},
    "analysis": {"core", "io", "stats"},
    "output": {"core", "io", "stats", "analysis"},
    "cli": {"core", "io", "stats", "analysis", "output"},
}


def _module_name(path: Path) -> str:
    parts = path.relative_to(PACKAGE.parent).with_suffix("").parts
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


def _layer(module: str) -> str | None:
    parts = module.split(".")
    return parts[1] if len(parts) > 1 and parts[0] == "agree" else None


def _imports(path: Path) -> list[tuple[int, str, list[str]]]:
    """(line, imported module, imported names) for every import in the file, at any depth."""
    tree = ast.parse(path.read_text(encoding="utf-8"))
    package = _module_name(path) if path.name == "__init__.py" else _module_name(path).rpartition(".")[0]
    found = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            for alias in node.names:
                found.append((node.lineno, alias.name, []))
        elif isinstance(node, ast.ImportFrom):
            module = node.module or ""
            if node.level:
                base = package.split(".")
                base = base[:len(base) - (node.level - 1)]
                module = ".".join(base + ([module] if module else []))
            found.append((node.lineno, module, [alias.name for alias in node.names]))
    return found


def _modules() -> list[Path]:
    return sorted(PACKAGE.rglob("*.py"))


def test_every_module_sits_in_a_layer():
    loose = [str(p.relative_to(PACKAGE)) for p in _modules()
             if p.parent == PACKAGE and p.name != "__init__.py"]
    assert not loose, f"modules outside the layer folders: {loose}"
    assert {p.name for p in PACKAGE.iterdir() if p.is_dir() and not p.name.startswith("__")} == set(MAY_IMPORT)


def _violations() -> list[str]:
    problems = []
    for path in _modules():
        me = _module_name(path)
        layer = _layer(me)
        for line, module, names in _imports(path):
            if not module.startswith("agree"):
                continue
            where = f"{path.relative_to(PACKAGE.parent)}:{line}"
            if module == "agree" and me != "agree":
                problems.append(f"{where}: imports the package root")
                continue
            target = _layer(module)
            if layer is not None and target is not None and target != layer and target not in MAY_IMPORT[layer]:
                problems.append(f"{where}: {layer} imports {module} ({target} is not below {layer})")
            for name in names:
                private_module = any(part.startswith("_") and part != "__init__" for part in module.split("."))
                if (name.startswith("_") or private_module) and module != me:
                    problems.append(f"{where}: imports the private name {module}.{name}")
    return problems


def test_imports_only_go_down_and_private_names_stay_private():
    problems = _violations()
    assert not problems, "\n".join(problems)


@pytest.mark.parametrize("source, expected", [
    ("from agree.output.report import build_report", "stats imports agree.output.report"),
    ("def f():\n    from agree.analysis import rounds", "stats imports agree.analysis"),
    ("from agree.core.results import _clean", "private name agree.core.results._clean"),
    ("import agree", "imports the package root"),
])
def test_the_checker_sees_each_kind_of_violation(tmp_path, monkeypatch, source, expected):
    fake = tmp_path / "agree"
    for layer in MAY_IMPORT:
        (fake / layer).mkdir(parents=True)
        (fake / layer / "__init__.py").write_text("")
    (fake / "__init__.py").write_text("")
    (fake / "stats" / "thing.py").write_text(source + "\n")
    monkeypatch.setattr(__import__(__name__, fromlist=["PACKAGE"]), "PACKAGE", fake)
    assert any(expected in p for p in _violations())
