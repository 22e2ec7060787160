"""The shape of the code (house choice, DEVELOPERS.md "The shape of the code"), checked on the AST.

* No import cycle among masterqc's modules at import time (module-level imports,
  a package's ``__init__`` counted as imported with any of its modules).
* The read layer (``masterqc.audio``) is imported only by what reads files:
  never by the judge, the spec models, the report, the contract or the registry.
* The contract imports nothing from masterqc's layers.
"""

from __future__ import annotations

import ast
from pathlib import Path

import masterqc

ROOT = Path(masterqc.__file__).parent


def _module_name(path: Path) -> str:
    rel = path.relative_to(ROOT.parent).with_suffix("")
    parts = list(rel.parts)
    if parts[-1] == "__init__":
        parts = parts[:-1]
    return ".".join(parts)


def _modules() -> dict[str, Path]:
    return {_module_name(p): p for p in ROOT.rglob("*.py")}


def _imports(path: Path, modules, module_level_only: bool) -> set[str]:
    """masterqc modules imported by the file (``from pkg import sub`` counts ``pkg.sub`` when a module)."""
    tree = ast.parse(path.read_text(encoding="utf-8"))
    me = _module_name(path)
    is_pkg = path.name == "__init__.py"
    nodes = tree.body if module_level_only else list(ast.walk(tree))
    if module_level_only:  # module level includes if/try blocks, not function bodies
        stack, nodes = list(tree.body), []
        while stack:
            n = stack.pop()
            nodes.append(n)
            if isinstance(n, (ast.If, ast.Try)):
                stack.extend(n.body + n.orelse + getattr(n, "finalbody", []) +
                             [x for h in getattr(n, "handlers", []) for x in h.body])
    out = set()
    for n in nodes:
        if isinstance(n, ast.Import):
            names = [a.name for a in n.names]
        elif isinstance(n, ast.ImportFrom):
            if n.level:
                base = me.split(".") if is_pkg else me.split(".")[:-1]
                base = base[: len(base) - (n.level - 1)]
                mod = ".".join(base + ([n.module] if n.module else []))
            else:
                mod = n.module or ""
            names = [mod] + [f"{mod}.{a.name}" for a in n.names]
        else:
            continue
        for name in names:
            if name in modules:
                out.add(name)
    # importing a.b.c runs a/__init__ and a/b/__init__ first
    for name in list(out):
        parts = name.split(".")
        for i in range(1, len(parts)):
            parent = ".".join(parts[:i])
            if parent in modules:
                out.add(parent)
    out.discard(me)
    return out


def _cycles(graph: dict[str, set[str]]) -> list[list[str]]:
    index, low, stack, on, out, counter = {}, {}, [], set(), [], [0]

    def visit(v):  # Tarjan's strongly connected components
        index[v] = low[v] = counter[0]
        counter[0] += 1
        stack.append(v)
        on.add(v)
        for w in graph.get(v, ()):
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in on:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            comp = []
            while True:
                w = stack.pop()
                on.discard(w)
                comp.append(w)
                if w == v:
                    break
            if len(comp) > 1:
                out.append(sorted(comp))

    for v in graph:
        if v not in index:
            visit(v)
    return out


def test_no_import_cycles_at_import_time():
    modules = _modules()
    graph = {}
    for name, path in modules.items():
        # a package's own __init__ importing its submodules is how packages work, not a cycle
        graph[name] = {m for m in _imports(path, modules, True) if not name.startswith(m + ".")}
    assert _cycles(graph) == []


def test_the_read_layer_is_imported_only_by_what_reads_files():
    modules = _modules()
    pure = ("masterqc.judge", "masterqc.spec", "masterqc.report", "masterqc.contract", "masterqc.registry",
            "masterqc.timecode")
    offenders = []
    for name, path in modules.items():
        if not name.startswith(pure):
            continue
        for m in _imports(path, modules, False):
            if m == "masterqc.audio" or m.startswith("masterqc.audio."):
                offenders.append(f"{name} imports {m}")
    assert offenders == []


def test_the_contract_and_timecode_import_no_layer():
    modules = _modules()
    for name in ("masterqc.contract", "masterqc.timecode"):
        # masterqc.result_models: the contract's own pydantic models, loaded on first use
        assert _imports(modules[name], modules, False) - {"masterqc", "masterqc.result_models"} == set(), name
    assert _imports(modules["masterqc.result_models"], modules, False) - {"masterqc", "masterqc.contract"} == set()


def test_the_walk_sees_a_planted_cycle(tmp_path):
    """The checker itself: a two-module cycle is found (so an empty answer means something)."""
    assert _cycles({"a": {"b"}, "b": {"a"}, "c": {"a"}}) == [["a", "b"]]
