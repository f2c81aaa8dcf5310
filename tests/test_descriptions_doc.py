"""docs/descriptions.md lists every key the TOML readers accept and is regenerated from the code.

The page is written by tools/write_descriptions_doc.py; the tests regenerate it
and compare, and check that every key set a reader passes to
``motes.tomlcheck.check_keys`` is one of the page's tables (found by reading
every module's source, so a new key or table cannot slip past the page).
"""

from __future__ import annotations

import ast
import importlib
import importlib.util
import sys
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[1]
PACKAGE = REPO / "src" / "motes"
PAGE = REPO / "docs" / "descriptions.md"
REGENERATE = ".venv/bin/python tools/write_descriptions_doc.py"


@pytest.fixture(scope="module")
def tool():
    spec = importlib.util.spec_from_file_location("write_descriptions_doc", REPO / "tools" / "write_descriptions_doc.py")
    module = importlib.util.module_from_spec(spec)
    sys.modules[spec.name] = module      # dataclasses look their module up
    spec.loader.exec_module(module)
    return module


@pytest.fixture(scope="module")
def sections(tool):
    return tool.sections()


def test_page_is_up_to_date(tool, sections):
    assert PAGE.read_text(encoding="utf-8") == tool.render(sections), \
        f"docs/descriptions.md is stale: run {REGENERATE}"


def test_every_accepted_key_is_described(tool, sections):
    assert tool.undescribed(sections) == [], f"describe these keys in tools/write_descriptions_doc.py, then run {REGENERATE}"


def test_no_key_is_described_that_no_reader_accepts(tool, sections):
    assert tool.stale(sections) == []


def _check_keys_calls():
    """(module name, line, allowed-keys expression, enclosing class) of every check_keys call in the package."""
    out = []
    for path in sorted(PACKAGE.rglob("*.py")):
        if path.name == "tomlcheck.py":
            continue
        parts = list(path.relative_to(PACKAGE.parent).with_suffix("").parts)
        if parts[-1] == "__init__":
            parts.pop()
        tree = ast.parse(path.read_text(encoding="utf-8"))
        classes, assigned = {}, {}
        for node in ast.walk(tree):
            if isinstance(node, ast.ClassDef):
                for child in ast.walk(node):
                    classes.setdefault(id(child), node.name)
            if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef)):
                local = {t.id: a.value for a in ast.walk(node) if isinstance(a, ast.Assign)
                         for t in a.targets if isinstance(t, ast.Name)}
                for child in ast.walk(node):
                    assigned[id(child)] = local
        for node in ast.walk(tree):
            if isinstance(node, ast.Call) and getattr(node.func, "id", getattr(node.func, "attr", None)) == "check_keys":
                allowed = node.args[1] if len(node.args) > 1 else next(k.value for k in node.keywords if k.arg == "allowed")
                if isinstance(allowed, ast.Name):   # a local variable: the expression assigned to it
                    allowed = assigned.get(id(node), {}).get(allowed.id, allowed)
                out.append((".".join(parts), node.lineno, allowed, classes.get(id(node))))
    return out


CALLS = _check_keys_calls()


def test_the_scan_finds_the_readers():
    modules = {c[0] for c in CALLS}
    assert {"motes.photometry.targets", "motes.dust.model.description", "motes.dust.model.mixture",
            "motes.dust.fit.spec", "motes.dust.fit.priors", "motes.dust.grid.spec",
            "motes.companion.classify", "motes.companion.library"} <= modules


@pytest.mark.parametrize("module, line, allowed, owner", CALLS, ids=[f"{c[0]}:{c[1]}" for c in CALLS])
def test_every_key_set_a_reader_accepts_is_a_table_of_the_page(sections, module, line, allowed, owner):
    namespace = vars(importlib.import_module(module))
    local = {"cls": namespace[owner], "self": namespace[owner]} if owner else {}
    keys = set(eval(compile(ast.Expression(allowed), module, "eval"), namespace, local))
    tables = {frozenset(s.keys): s.table for s in sections}
    assert frozenset(keys) in tables, (
        f"{module} line {line} accepts the keys {sorted(keys)}, which no table of docs/descriptions.md lists: "
        f"add the table to tools/write_descriptions_doc.py and run {REGENERATE}")


def test_the_keys_the_issue_named_are_documented():
    text = PAGE.read_text(encoding="utf-8")
    for table, key in (("[geometry]", "inclination_deg"), ("[geometry]", "n_azimuths"), ("[mixing]", "matrix"),
                       ("[model]", "wavelength_nodes"), ("[[materials]]", "extrapolation"),
                       ("[[materials]]", "density")):
        section = text.split(f"### `{table}`", 1)[1].split("### ", 1)[0]
        assert f"| `{key}` |" in section, (table, key)


def test_fit_and_grid_docs_point_to_the_page():
    for name in ("fit.md", "grid.md"):
        assert "(descriptions.md)" in (REPO / "docs" / name).read_text(encoding="utf-8"), name
