"""The public API documents itself: numpydoc docstrings with examples that run, and type hints.

Check values: the rule (DEVELOPERS.md, "Conventions": every public function has a numpydoc
docstring with an ``Examples`` section, the package ships ``py.typed``); the examples'
expected outputs are stated in the docstrings themselves, with their sources there.
"""
import doctest
import importlib
import inspect
import os
import re
from pathlib import Path

import pytest

import selfcon
import selfcon.api

ROOT = Path(__file__).resolve().parent.parent
#: names exported for the record, not callables with a docstring of their own
NOT_DOCUMENTED = {"__version__"}
#: the public functions of the design and batch stages and the Result's own methods
OTHERS = ["selfcon.design.sweep_bias", "selfcon.design.tune", "selfcon.design.summarize_study",
          "selfcon.batch.run_study", "selfcon.batch.load_study"] + [
    f"selfcon.output.result.Result.{m}" for m in ("save", "channel", "main_channel", "success",
                                                   "status", "potential")]


def _resolve(dotted):
    """The object a dotted name means to a user: attributes first (``selfcon.design.tune`` is
    the function the package exports, not the module of the same name), modules otherwise."""
    parts = dotted.split(".")
    obj = importlib.import_module(parts[0])
    for i, part in enumerate(parts[1:], 2):
        obj = getattr(obj, part) if hasattr(obj, part) else importlib.import_module(".".join(parts[:i]))
    return obj


def _public():
    names = [f"selfcon.{n}" for n in selfcon.__all__ if n not in NOT_DOCUMENTED]
    names += [f"selfcon.api.{n}" for n in selfcon.api.__all__ if n not in NOT_DOCUMENTED]
    return names + OTHERS


PUBLIC = _public()
EXAMPLES = re.compile(r"^Examples\n-{8,}\n", re.M)


def test_the_lists_are_not_empty():
    assert len(PUBLIC) > 20


def test_every_public_name_has_a_numpydoc_examples_section():
    missing = []
    for name in PUBLIC:
        doc = inspect.getdoc(_resolve(name)) or ""
        if not EXAMPLES.search(doc) or ">>>" not in doc.split("Examples", 1)[-1]:
            missing.append(name)
    assert missing == [], ("these public names need a numpydoc docstring with an 'Examples' "
                           "section holding >>> examples: " + ", ".join(missing))


def test_public_functions_have_type_hints():
    bare = []
    for name in PUBLIC:
        obj = _resolve(name)
        if inspect.isfunction(obj):
            sig = inspect.signature(obj)
            if sig.return_annotation is inspect.Signature.empty or any(
                    p.annotation is inspect.Parameter.empty for p in sig.parameters.values()
                    if p.kind not in (p.VAR_KEYWORD, p.VAR_POSITIONAL) and p.name not in ("self", "cls")):
                bare.append(name)
    assert bare == [], "public functions without full type hints: " + ", ".join(bare)


def test_package_ships_py_typed():
    assert (ROOT / "selfcon" / "py.typed").is_file()
    assert '"py.typed"' in (ROOT / "pyproject.toml").read_text()      # package data


def _doctests():
    finder = doctest.DocTestFinder(recurse=False)
    seen, out = set(), []
    for name in PUBLIC:
        obj = _resolve(name)
        if id(obj) in seen:
            continue
        seen.add(id(obj))
        for t in finder.find(obj, name, globs={}):
            if any(not ex.options.get(doctest.SKIP) for ex in t.examples):
                out.append(pytest.param(t, id=name))
    return out


@pytest.mark.parametrize("test", _doctests())
def test_examples_run(test, tmp_path, monkeypatch):
    """Each docstring's examples, run from a folder that holds inputs/ (as the examples
    assume: the repository root), so the files they write land in a temporary folder."""
    (tmp_path / "inputs").symlink_to(ROOT / "inputs", target_is_directory=True)
    monkeypatch.chdir(tmp_path)
    runner = doctest.DocTestRunner(optionflags=doctest.ELLIPSIS | doctest.NORMALIZE_WHITESPACE)
    report = []
    runner.run(test, out=report.append)
    assert runner.failures == 0, "".join(report)
    assert os.getcwd() == str(tmp_path)
