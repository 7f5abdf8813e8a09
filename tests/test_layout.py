"""The package's import rules (DEVELOPERS.md, "Architecture"): stages import only their own
stage or lower ones, and no module imports itself back through a cycle.

The imports are read from the source with ``ast`` (every ``import`` and ``from ... import``,
at any depth, lazy ones inside functions included), so a rule broken inside a function body
is caught as well.
"""
import ast
import pathlib

import pytest

PACKAGE = pathlib.Path(__file__).resolve().parent.parent / "selfcon"

#: stage of every module, by dotted-name prefix (longest prefix wins); lower numbers are lower stages
STAGES = {
    "selfcon.constants": 0, "selfcon.errors": 0, "selfcon.version": 0,
    "selfcon.input": 1,
    "selfcon.model": 2,
    "selfcon.solver": 3,
    "selfcon.output": 4,
    "selfcon.api": 5,
    "selfcon.design": 6,
    "selfcon.batch": 6,
    "selfcon.cli": 7, "selfcon.__main__": 7,
    "selfcon": 8,
}
#: sibling stages that must not import each other
SEPARATE = {("selfcon.design", "selfcon.batch"), ("selfcon.batch", "selfcon.design")}


def _modules():
    out = {}
    for path in sorted(PACKAGE.rglob("*.py")):
        parts = list(path.relative_to(PACKAGE.parent).with_suffix("").parts)
        if parts[-1] == "__init__":
            parts = parts[:-1]
        out[".".join(parts)] = path
    return out


MODULES = _modules()


def _stage_key(name):
    best = None
    for prefix in STAGES:
        if (name == prefix or name.startswith(prefix + ".")) and (best is None or len(prefix) > len(best)):
            best = prefix
    return best


def _imports(name, path):
    """Modules of the package that ``name`` imports (resolved to module names)."""
    tree = ast.parse(path.read_text(encoding="utf-8"))
    pkg = name if path.name == "__init__.py" else name.rsplit(".", 1)[0]
    found = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.ImportFrom):
            if node.level:
                base = pkg.split(".")
                base = base[: len(base) - (node.level - 1)]
                mod = ".".join(base + ([node.module] if node.module else []))
            else:
                mod = node.module or ""
            for alias in node.names:
                cand = f"{mod}.{alias.name}"
                if cand in MODULES:
                    found.add(cand)
                elif mod in MODULES:
                    found.add(mod)
        elif isinstance(node, ast.Import):
            for alias in node.names:
                if alias.name in MODULES:
                    found.add(alias.name)
    found.discard(name)
    return found


GRAPH = {name: _imports(name, path) for name, path in MODULES.items()}


def test_every_module_has_a_stage():
    assert len(MODULES) > 30, "the package was not found (test would be vacuous)"
    missing = [m for m in MODULES if _stage_key(m) is None]
    assert missing == []


def test_no_module_imports_a_higher_stage():
    bad = []
    for name, targets in GRAPH.items():
        s = _stage_key(name)
        for t in targets:
            ts = _stage_key(t)
            if STAGES[ts] > STAGES[s] or (s, ts) in SEPARATE:
                bad.append(f"{name} (stage {STAGES[s]}) imports {t} (stage {STAGES[ts]})")
    assert bad == [], "\n".join(bad)


def test_no_import_cycles():
    # Tarjan's strongly connected components over the module graph
    index, low, stack, on, cycles = {}, {}, [], set(), []
    counter = [0]

    def visit(v):
        index[v] = low[v] = counter[0]
        counter[0] += 1
        stack.append(v)
        on.add(v)
        for w in GRAPH[v]:
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
                cycles.append(sorted(comp))

    for v in GRAPH:
        if v not in index:
            visit(v)
    assert cycles == []


#: every subpackage (a folder with an __init__.py), stages and the folders inside them alike
SUBPACKAGES = sorted(str(p.parent.relative_to(PACKAGE)) for p in PACKAGE.rglob("__init__.py")
                     if p.parent != PACKAGE)


def test_the_stages_are_subpackages():
    assert {"input", "model", "solver", "output", "design", "batch", "solver/kernels"} <= set(SUBPACKAGES)


@pytest.mark.parametrize("stage", SUBPACKAGES)
def test_each_stage_says_what_it_owns(stage):
    doc = ast.get_docstring(ast.parse((PACKAGE / stage / "__init__.py").read_text()))
    assert doc and "import" in doc, f"selfcon/{stage}/__init__.py needs a docstring naming what it may import"


def test_kernels_import_only_numpy_numba_and_constants():
    # what selfcon/solver/kernels/__init__.py says they may import: arrays in, arrays out
    allowed = ("numpy", "numba", "math", "typing", "__future__", "selfcon.constants", "selfcon.solver.kernels")
    bad = []
    for path in sorted((PACKAGE / "solver" / "kernels").glob("*.py")):
        for node in ast.walk(ast.parse(path.read_text())):
            if isinstance(node, ast.Import):
                names = [a.name for a in node.names]
            elif isinstance(node, ast.ImportFrom):
                names = [node.module or ""]
            else:
                continue
            bad += [(path.name, n) for n in names if not any(n == a or n.startswith(a + ".") for a in allowed)]
    assert bad == []
