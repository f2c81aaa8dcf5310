"""The docstring examples (``>>>``) of every motes module run as part of the test suite.

Modules are imported by name (``motes.__main__`` is left out: importing it runs
the command line). Examples print numbers with an explicit format, so the
comparison is exact text; ``ELLIPSIS`` and ``NORMALIZE_WHITESPACE`` are on.
"""

from __future__ import annotations

import doctest
import importlib
import io
import pkgutil

import pytest

import motes

FLAGS = doctest.ELLIPSIS | doctest.NORMALIZE_WHITESPACE


def _modules_with_examples() -> list[str]:
    out = []
    finder = doctest.DocTestFinder()
    for info in pkgutil.walk_packages(motes.__path__, prefix="motes."):
        if info.name.endswith("__main__"):
            continue
        module = importlib.import_module(info.name)
        if any(t.examples for t in finder.find(module, module.__name__)):
            out.append(info.name)
    return out


MODULES = _modules_with_examples()


def test_examples_are_found():
    # a guard against a finder that silently collects nothing
    assert {"motes.optics.sizes", "motes.parameters", "motes.photometry.conversions"} <= set(MODULES)


@pytest.mark.parametrize("name", MODULES)
def test_docstring_examples(name):
    module = importlib.import_module(name)
    runner = doctest.DocTestRunner(optionflags=FLAGS)
    report = io.StringIO()
    for test in doctest.DocTestFinder().find(module, module.__name__):
        runner.run(test, out=report.write)
    result = runner.summarize(verbose=False)
    assert result.attempted > 0
    assert result.failed == 0, report.getvalue()
