"""The public API documents itself: every top-level function and result type has numpydoc
sections (Parameters, Returns, Raises, References, Examples for functions; Examples for types)
and its Examples run, as written, on the demo data in datasets/ (doctest, from the repository
root)."""
import doctest
import inspect
from pathlib import Path

import pytest

import bayespool

ROOT = Path(__file__).resolve().parents[1]
ERRORS = {"InputError", "ImpossibleEvidenceError"}
NAMES = sorted(set(bayespool.__all__) - ERRORS)
FUNCTION_SECTIONS = ("Parameters", "Returns", "Raises", "References", "Examples")


def _sections(doc: str) -> set:
    lines = inspect.cleandoc(doc or "").splitlines()
    return {a.strip() for a, b in zip(lines, lines[1:])
            if b.strip() and set(b.strip()) == {"-"} and len(b.strip()) == len(a.strip())}


@pytest.mark.parametrize("name", NAMES)
def test_numpydoc_sections(name):
    obj = getattr(bayespool, name)
    have = _sections(obj.__doc__)
    need = FUNCTION_SECTIONS if not inspect.isclass(obj) else ("Examples",)
    assert set(need) <= have, f"{name} lacks {sorted(set(need) - have)}"


MORE = ["simulation.study.check_study", "simulation.study.run_study"]


@pytest.mark.parametrize("name", NAMES + MORE)
def test_examples_run_as_written(name, monkeypatch):
    monkeypatch.chdir(ROOT)  # the examples read datasets/ relative to the repository root
    if "." in name:
        import importlib
        module, attr = name.rsplit(".", 1)
        obj = getattr(importlib.import_module(f"bayespool.{module}"), attr)
    else:
        obj = getattr(bayespool, name)
    tests = [t for t in doctest.DocTestFinder(recurse=False).find(obj, name) if t.examples]
    assert tests, f"{name} has no example"
    runner = doctest.DocTestRunner(optionflags=doctest.ELLIPSIS | doctest.NORMALIZE_WHITESPACE)
    for t in tests:
        runner.run(t)
    result = runner.summarize(verbose=False)
    assert result.failed == 0, f"{result.failed} of {result.attempted} examples of {name} failed"
