"""The house rules that keep the package readable, checked on the source itself.

* Imports flow one way, down the layers of the data flow (DEVELOPERS.md lists them):
  a module may import from a lower layer or from its own package, never upward, and
  no chain of imports (including imports inside functions) comes back to where it started.
* No source module grows past 450 lines.
* Every declared runtime dependency is imported (or named) by the package.
* Nothing points at documents outside the repository.
"""

from __future__ import annotations

import ast
import re
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
PACKAGE = ROOT / "src" / "radledger"

# lowest first; a module may import only from layers below its own (or its own package)
LAYERS = [
    {"_version", "errors", "kinds"},
    {"units", "physics"},
    {"grid"},
    {"io"},
    {"model", "stations"},
    {"config"},
    {"outputs"},
    {"planning"},
    {"execution"},
    {"stages"},
    {"runner"},
    {"api", "cli"},
    {"__init__"},
]
RANK = {name: i for i, names in enumerate(LAYERS) for name in names}


def _modules() -> dict[str, Path]:
    out = {}
    for path in PACKAGE.rglob("*.py"):
        rel = path.relative_to(PACKAGE.parent).with_suffix("")
        parts = list(rel.parts)
        if parts[-1] == "__init__":
            parts = parts[:-1]
        out[".".join(parts)] = path
    return out


MODULES = _modules()


def _resolve(module: str, is_package: bool, node: ast.ImportFrom) -> list[str]:
    """Absolute radledger module names an ImportFrom node imports."""
    if node.level == 0:
        base = node.module or ""
    else:
        parts = module.split(".")
        if not is_package:
            parts = parts[:-1]
        parts = parts[: len(parts) - (node.level - 1)]
        base = ".".join(parts + ([node.module] if node.module else []))
    targets = []
    for alias in node.names:
        sub = f"{base}.{alias.name}"
        targets.append(sub if sub in MODULES else base)
    return [t for t in targets if t == "radledger" or t.startswith("radledger.")]


def _imports() -> dict[str, set[str]]:
    graph = {}
    for module, path in MODULES.items():
        tree = ast.parse(path.read_text(encoding="utf-8"))
        found = set()
        for node in ast.walk(tree):   # imports inside functions count too
            if isinstance(node, ast.Import):
                found |= {a.name for a in node.names if a.name.startswith("radledger")}
            elif isinstance(node, ast.ImportFrom):
                found |= set(_resolve(module, path.name == "__init__.py", node))
        graph[module] = {t for t in found if t != module}
    return graph


def _top(module: str) -> str:
    parts = module.split(".")
    return parts[1] if len(parts) > 1 else "__init__"


def test_every_top_level_module_has_a_layer():
    unknown = sorted({_top(m) for m in MODULES} - set(RANK))
    assert not unknown, f"give these modules a layer in LAYERS (and DEVELOPERS.md): {unknown}"


def test_imports_flow_down_the_layers():
    upward = []
    for module, targets in _imports().items():
        for target in targets:
            a, b = _top(module), _top(target)
            if target == "radledger" and module != "radledger":
                upward.append(f"{module} imports the package root (use radledger._version etc.)")
            elif a != b and RANK[b] >= RANK[a]:
                upward.append(f"{module} (layer {RANK[a]}) imports {target} (layer {RANK[b]})")
    assert not upward, "\n".join(sorted(upward))


def test_no_import_cycles():
    graph = _imports()
    index, low, stack, on_stack, cycles = {}, {}, [], set(), []
    counter = [0]
    sys.setrecursionlimit(max(sys.getrecursionlimit(), 10000))

    def visit(v):   # Tarjan's strongly connected components
        index[v] = low[v] = counter[0]
        counter[0] += 1
        stack.append(v)
        on_stack.add(v)
        for w in graph.get(v, ()):
            if w not in graph:
                continue
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in on_stack:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            comp = []
            while True:
                w = stack.pop()
                on_stack.discard(w)
                comp.append(w)
                if w == v:
                    break
            if len(comp) > 1:
                cycles.append(sorted(comp))

    for v in graph:
        if v not in index:
            visit(v)
    assert not cycles, f"import cycles: {cycles}"


@pytest.mark.parametrize("module", sorted(MODULES))
def test_modules_stay_small(module):
    n = len(MODULES[module].read_text(encoding="utf-8").splitlines())
    assert n <= 450, f"{MODULES[module].relative_to(ROOT)} has {n} lines; split it by concern"


def _declared_dependencies() -> list[str]:
    text = (ROOT / "pyproject.toml").read_text(encoding="utf-8")
    block = re.search(r"^dependencies = \[(.*?)^\]", text, re.S | re.M).group(1)
    return [re.split(r"[<>=\[ ]", d.strip().strip('",'))[0] for d in block.splitlines() if d.strip()]


# distribution name -> import name where they differ
_IMPORT_NAME = {"pyyaml": "yaml"}


def test_every_declared_dependency_is_used():
    source = "\n".join(p.read_text(encoding="utf-8") for p in MODULES.values())
    unused = []
    for dist in _declared_dependencies():
        name = _IMPORT_NAME.get(dist.lower(), dist.lower().replace("-", "_"))
        if not re.search(rf"(^\s*(import|from)\s+{name}\b)|(\"{name}\")", source, re.M):
            unused.append(dist)
    assert not unused, f"declared in pyproject.toml but never used: {unused}"


_OUTSIDE = ("shared" + "/", "SCIENCE" + ".md", "INTERFACE" + ".md", "PERF" + ".md", "DESIGN" + ".md",
            "STYLE" + ".md")


def test_nothing_points_outside_the_repository():
    files = [*PACKAGE.rglob("*.py"), *(ROOT / "tests").rglob("*.py"), *(ROOT / "benchmarks").rglob("*.py"),
             *ROOT.glob("*.md"), *(ROOT / "benchmarks").glob("*.md"), *(ROOT / "configs").rglob("*"),
             *(ROOT / "sample_tiles").glob("*.md")]
    hits = [f"{p.relative_to(ROOT)}: {needle}" for p in files if p.is_file() and p.suffix in (".py", ".md", ".yaml",
                                                                                          ".csv")
            for needle in _OUTSIDE if needle in p.read_text(encoding="utf-8", errors="replace")]
    assert not hits, "state the fact and its published source instead:\n" + "\n".join(hits)
