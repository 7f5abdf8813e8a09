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
            ok = allowed + (("functools", "importlib") if path.name == "__init__.py" else ())   # its load()
            bad += [(path.name, n) for n in names if not any(n == a or n.startswith(a + ".") for a in ok)]
    assert bad == []


def _private_uses(name, path):
    """Private names (one leading underscore) that module ``name`` takes from another module of
    the package: ``from selfcon.x import _f`` or ``alias._f`` on an imported selfcon module."""
    tree = ast.parse(path.read_text(encoding="utf-8"))
    found, aliases = [], {}
    for node in ast.walk(tree):
        if isinstance(node, ast.ImportFrom) and (node.module or "").startswith("selfcon"):
            for a in node.names:
                full = f"{node.module}.{a.name}"
                if full in MODULES:                       # a module imported by name
                    aliases[a.asname or a.name] = full
                    private = a.name.startswith("_") and full.rsplit(".", 1)[0] != name.rsplit(".", 1)[0]
                else:
                    private = a.name.startswith("_") and not a.name.startswith("__")
                if private and node.module != name:
                    found.append(f"{node.module}.{a.name}")
        elif isinstance(node, ast.Import):
            for a in node.names:
                if a.name in MODULES and a.asname:
                    aliases[a.asname] = a.name
    for node in ast.walk(tree):
        if (isinstance(node, ast.Attribute) and isinstance(node.value, ast.Name) and node.value.id in aliases
                and node.attr.startswith("_") and not node.attr.startswith("__")
                and aliases[node.value.id] != name):
            found.append(f"{aliases[node.value.id]}.{node.attr}")
    return found


def test_no_module_uses_another_modules_private_names():
    # one copy of each rule, imported under its public name (DEVELOPERS.md, "Layer rules");
    # a package's private module (kernels/_fermi_table) is its own package's business
    bad = {name: _private_uses(name, path) for name, path in MODULES.items()}
    assert {k: v for k, v in bad.items() if v} == {}
