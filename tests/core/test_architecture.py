"""The house rules, checked by parsing the source (no imports needed)."""
from __future__ import annotations

import ast
import inspect
import re
import tomllib
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]
CORE = ROOT / "prep"
PLUGINS = ROOT / "plugins"


def _imports(path: Path) -> set[str]:
    """Absolute module names imported anywhere in a file (relative imports resolved in its package)."""
    return set().union(*(_imports_of_node(n, path) for n in ast.walk(ast.parse(path.read_text(encoding="utf-8")))))


def test_core_never_imports_builtin_plugins() -> None:
    offenders = [f"{p.relative_to(ROOT)} imports {m}" for p in CORE.rglob("*.py")
                 for m in _imports(p) if m.startswith("prep_plugins")]
    assert offenders == []


def test_plugins_never_import_each_other() -> None:
    plugins = sorted((p.stem for p in PLUGINS.glob("*.py") if not p.stem.startswith("_")), key=len, reverse=True)

    def owner(stem: str) -> str:
        """A private module ``_<plugin>_<topic>`` belongs to ``<plugin>``."""
        if not stem.startswith("_"):
            return stem
        return next((name for name in plugins if stem.startswith(f"_{name}_")), stem)

    offenders = []
    for p in PLUGINS.glob("*.py"):
        mine = owner(p.stem)
        for m in _imports(p):
            parts = m.split(".")
            if parts[0] == "prep_plugins" and len(parts) > 1 and owner(parts[1]) != mine:
                offenders.append(f"{p.name} imports {m}")
    assert offenders == [], offenders


def test_hookspecs_import_nothing_at_runtime() -> None:
    tree = ast.parse((CORE / "hookspecs.py").read_text())
    runtime = [n for n in tree.body if isinstance(n, (ast.Import, ast.ImportFrom))]
    names = {(n.module if isinstance(n, ast.ImportFrom) else n.names[0].name) for n in runtime}
    assert names <= {"__future__", "typing", "pluggy"}


def test_core_modules_have_no_import_cycles() -> None:
    mods = {".".join(p.relative_to(ROOT).with_suffix("").parts).removesuffix(".__init__"): p
            for p in CORE.rglob("*.py")}
    graph: dict[str, set[str]] = {}
    for name, p in mods.items():
        top_level: set[str] = set()
        for node in ast.parse(p.read_text()).body:  # module-level imports create import-time cycles
            top_level |= _imports_of_node(node, p)
        graph[name] = {m for m in top_level if m in mods and m != name and not name.startswith(m + ".")}
    state: dict[str, int] = {}

    def visit(n: str, stack: list[str]) -> None:
        state[n] = 1
        for m in sorted(graph[n]):
            if state.get(m) == 1:
                pytest.fail("import cycle: " + " -> ".join(stack[stack.index(m):] + [m]))
            if m not in state:
                visit(m, stack + [m])
        state[n] = 2

    for n in sorted(graph):
        if n not in state:
            visit(n, [n])


def _imports_of_node(node: ast.AST, path: Path) -> set[str]:
    top, pkg = (CORE, "prep") if path.is_relative_to(CORE) else (PLUGINS, "prep_plugins")
    parts = [pkg, *path.relative_to(top).parent.parts]
    out = set()
    if isinstance(node, ast.Import):
        out |= {a.name for a in node.names}
    elif isinstance(node, ast.ImportFrom):
        mod = ".".join(parts[: len(parts) - node.level + 1] + ([node.module] if node.module else [])) \
            if node.level else node.module or ""
        out.add(mod)
        out |= {f"{mod}.{a.name}" for a in node.names}
    return out


def test_every_package_is_declared_in_pyproject() -> None:
    cfg = tomllib.loads((ROOT / "pyproject.toml").read_text())["tool"]["setuptools"]
    declared = set(cfg["packages"])
    dirs = {v: k for k, v in cfg["package-dir"].items()}
    found = set()
    for top, pkg in dirs.items():
        for init in (ROOT / top).rglob("__init__.py"):
            rel = init.parent.relative_to(ROOT / top).parts
            found.add(".".join((pkg, *rel)))
    assert found <= declared, f"packages missing from pyproject: {sorted(found - declared)}"


def test_every_builtin_module_is_an_entry_point() -> None:
    eps = tomllib.loads((ROOT / "pyproject.toml").read_text())["project"]["entry-points"]["headprep"]
    modules = {p.stem for p in PLUGINS.glob("*.py") if not p.stem.startswith("_")}
    assert modules == set(eps), sorted(modules ^ set(eps))
    assert all(v == f"prep_plugins.{k}" for k, v in eps.items())


def test_every_hook_is_documented_with_its_signature() -> None:
    from prep import hookspecs

    doc = (ROOT / "docs" / "hooks.md").read_text()
    for name, fn in inspect.getmembers(hookspecs, inspect.isfunction):
        if name.startswith("headprep_"):
            sig = f"{name}{inspect.signature(fn)}".replace("'", "")
            assert f"## `{sig}`" in doc, f"docs/hooks.md lacks a section headed ## `{sig}`"


def test_every_finding_code_is_documented() -> None:
    from prep.findings import CODES

    doc = (ROOT / "docs" / "findings.md").read_text()
    documented = set(re.findall(r"^\| `([a-z0-9]+\.[a-z0-9-]+)` \|", doc, flags=re.M))
    used = set()
    for p in list(CORE.rglob("*.py")) + list(PLUGINS.rglob("*.py")):
        used |= set(re.findall(r"""code\s*=\s*["']([a-z0-9]+\.[a-z0-9-]+)["']""", p.read_text()))
    missing = (set(CODES) | used) - documented
    assert not missing, f"codes not documented in docs/findings.md: {sorted(missing)}"
