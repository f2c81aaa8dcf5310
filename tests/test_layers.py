"""The package's layering, as rules on its import graph.

Every module under ``src/motes`` is read with :mod:`ast` (nothing is
imported): top-level imports and the lazy ones inside functions, absolute and
relative, resolved to motes module names. The layers, bottom to top:

- the basement: the top-level modules ``motes/*.py`` (errors, conventions,
  files, progress, ...) and ``motes/data``; it imports no subpackage;
- ``photometry/`` and ``optics/``: basement only, and not each other;
- ``companion/`` (uses photometry) and ``dust/`` (uses optics and photometry),
  which do not import each other;
- ``report/``: formats the results of companion/ and dust/;
- ``demo/`` and ``cli/`` on top; demo/ does not import cli/.

Also: no import cycles between subpackages, and no module outside cli/ selects
a matplotlib backend.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

SRC = Path(__file__).resolve().parents[1] / "src"
PACKAGE = SRC / "motes"

BASEMENT = "basement"
LOWER = ("photometry", "optics", "companion", "dust")

#: layer -> (layers it may import besides itself and the basement, the rule in words)
RULES = {
    BASEMENT: (set(), "the basement (motes/*.py, motes/data) imports no subpackage"),
    "photometry": (set(), "photometry/ imports only the basement"),
    "optics": (set(), "optics/ imports only the basement"),
    "companion": ({"photometry"}, "companion/ imports only photometry/ and the basement"),
    "dust": ({"optics", "photometry"}, "dust/ imports only optics/, photometry/ and the basement"),
    "report": (set(LOWER), "report/ imports photometry/, optics/, companion/, dust/ and the basement; "
                           "never cli/ or demo/"),
    "demo": (set(LOWER) | {"report"}, "demo/ imports anything but cli/"),
    "cli": (set(LOWER) | {"report", "demo"}, "cli/ is on top"),
}


def _modules() -> dict[str, Path]:
    """Every motes module name and its file."""
    out = {}
    for path in sorted(PACKAGE.rglob("*.py")):
        parts = list(path.relative_to(SRC).with_suffix("").parts)
        if parts[-1] == "__init__":
            parts.pop()
        out[".".join(parts)] = path
    return out


MODULES = _modules()


def _is_package(name: str) -> bool:
    return MODULES[name].name == "__init__.py"


def _layer(name: str) -> str:
    parts = name.split(".")
    if len(parts) == 1 or parts[1] == "data":
        return BASEMENT
    if parts[1] == "__main__":            # `python -m motes`: the command line
        return "cli"
    if len(parts) == 2 and not _is_package(name):
        return BASEMENT
    return parts[1]


def _known(name: str) -> str:
    """The longest prefix of a dotted name that is a motes module."""
    parts = name.split(".")
    while parts and ".".join(parts) not in MODULES:
        parts.pop()
    return ".".join(parts)


def _imports(name: str, path: Path) -> list[tuple[int, str]]:
    """(line, motes module) of every import in a module, lazy ones included."""
    tree = ast.parse(path.read_text(), filename=str(path))
    package = name if _is_package(name) else name.rpartition(".")[0]
    found = []
    for node in ast.walk(tree):
        targets = []
        if isinstance(node, ast.Import):
            targets = [alias.name for alias in node.names]
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = package.split(".")
                base = base[: len(base) - (node.level - 1)]
                stem = ".".join(base + ([node.module] if node.module else []))
            else:
                stem = node.module or ""
            # `from pkg import mod` imports the module pkg.mod; `from mod import name` imports mod
            targets = [f"{stem}.{alias.name}" if f"{stem}.{alias.name}" in MODULES else stem
                       for alias in node.names]
        elif (isinstance(node, ast.Call) and node.args and isinstance(node.args[0], ast.Constant)
              and isinstance(node.args[0].value, str)
              and getattr(node.func, "attr", getattr(node.func, "id", None)) == "import_module"):
            targets = [node.args[0].value]
        for target in targets:
            if target == "motes" or target.startswith("motes."):
                found.append((node.lineno, _known(target) or target))
    return sorted(set(found))


def _where(path: Path, line: int) -> str:
    return f"{path.relative_to(SRC.parent)}:{line}"


def _graph():
    """Every import between motes modules: (importer, line, imported)."""
    return [(name, line, target) for name, path in MODULES.items() for line, target in _imports(name, path)]


def test_every_module_has_a_layer_with_a_rule():
    unknown = sorted({_layer(n) for n in MODULES} - set(RULES))
    assert not unknown, f"subpackages without a layering rule in tests/test_layers.py: {unknown}"


def test_imports_follow_the_layers():
    offences = []
    for importer, line, target in _graph():
        if target not in MODULES:
            offences.append(f"{_where(MODULES[importer], line)} imports {target} (rule: no such motes module)")
            continue
        src, dst = _layer(importer), _layer(target)
        allowed, rule = RULES[src]
        if dst != src and dst != BASEMENT and dst not in allowed:
            offences.append(f"{_where(MODULES[importer], line)} imports {target} (rule: {rule})")
    assert not offences, "layering offences:\n" + "\n".join(offences)


def _package_of(name: str) -> str:
    if name == "motes.__main__":       # the entry point is a node of its own, not the basement
        return name
    return name if _is_package(name) else name.rpartition(".")[0]


def test_no_import_cycles_between_subpackages():
    """Nodes are packages (motes, motes.dust, motes.dust.fit, ...); a package's ``__init__`` only
    gathers its children's names, so its imports are left out."""
    edges: dict[str, dict[str, tuple[str, int, str]]] = {}
    for importer, line, target in _graph():
        if _is_package(importer) or target not in MODULES:
            continue
        a, b = _package_of(importer), _package_of(target)
        if a != b:
            edges.setdefault(a, {}).setdefault(b, (importer, line, target))
    cycles, state, stack = [], {}, []

    def visit(node):
        state[node] = "open"
        stack.append(node)
        for nxt in sorted(edges.get(node, {})):
            if state.get(nxt) == "open":
                cycle = stack[stack.index(nxt):] + [nxt]
                cycles.append(" -> ".join(cycle) + ": " + "; ".join(
                    f"{_where(MODULES[edges[u][v][0]], edges[u][v][1])} imports {edges[u][v][2]}"
                    for u, v in zip(cycle, cycle[1:])))
            elif nxt not in state:
                visit(nxt)
        stack.pop()
        state[node] = "done"

    for node in sorted(edges):
        if node not in state:
            visit(node)
    assert not cycles, "import cycles between subpackages:\n" + "\n".join(cycles)


def _backend_calls(path: Path) -> list[tuple[int, str]]:
    """Calls that select a matplotlib backend: matplotlib.use(...), pyplot.switch_backend(...)."""
    tree = ast.parse(path.read_text(), filename=str(path))
    modules = {}        # local name -> "matplotlib" or "matplotlib.pyplot"
    functions = {}      # local name -> the selecting function imported by name
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            for alias in node.names:
                if alias.name in ("matplotlib", "matplotlib.pyplot"):
                    modules[alias.asname or alias.name.split(".")[0]] = (
                        alias.name if alias.asname else "matplotlib")
        elif isinstance(node, ast.ImportFrom) and node.module in ("matplotlib", "matplotlib.pyplot"):
            for alias in node.names:
                if alias.name == "pyplot":
                    modules[alias.asname or alias.name] = "matplotlib.pyplot"
                elif alias.name in ("use", "switch_backend"):
                    functions[alias.asname or alias.name] = f"{node.module}.{alias.name}"
    found = []
    for node in ast.walk(tree):
        if not isinstance(node, ast.Call):
            continue
        f = node.func
        if isinstance(f, ast.Name) and f.id in functions:
            found.append((node.lineno, functions[f.id]))
        elif isinstance(f, ast.Attribute) and f.attr in ("use", "switch_backend"):
            owner = f.value
            text = ast.unparse(owner)
            if modules.get(text) or text in ("matplotlib", "matplotlib.pyplot"):
                found.append((node.lineno, f"{text}.{f.attr}"))
    return found


def test_no_backend_selection_outside_the_command_line():
    offences = [f"{_where(path, line)} calls {call} (rule: only cli/ may select a matplotlib backend)"
                for name, path in MODULES.items() if _layer(name) != "cli"
                for line, call in _backend_calls(path)]
    assert not offences, "\n".join(offences)


@pytest.mark.parametrize("source, expected", [
    ("import matplotlib\nmatplotlib.use('Agg')\n", [(2, "matplotlib.use")]),
    ("import matplotlib as mpl\ndef f():\n    mpl.use('Agg')\n", [(3, "mpl.use")]),
    ("from matplotlib import use\nuse('Agg')\n", [(2, "matplotlib.use")]),
    ("import matplotlib.pyplot as plt\nplt.switch_backend('Agg')\n", [(2, "plt.switch_backend")]),
    ("import numpy as np\nnp.use = 1\nx = {}.get('use')\n", []),
])
def test_backend_search_finds_the_calls(tmp_path, source, expected):
    path = tmp_path / "m.py"
    path.write_text(source)
    assert _backend_calls(path) == expected


def test_import_reader_resolves_relative_absolute_and_lazy_imports(tmp_path):
    """Each kind of import, read as if the file were motes/dust/fit/run.py."""
    path = tmp_path / "run.py"
    path.write_text(
        "import numpy as np\n"                          # 1: not motes
        "from ... import __version__\n"                 # 2: the package itself
        "from ...errors import FitError\n"              # 3
        "from . import sampler\n"                       # 4: a module imported from its package
        "from .. import likelihood\n"                   # 5
        "from .spec import FitSpec\n"                   # 6
        "import motes.photometry.bands as bands\n"      # 7
        "def f():\n"
        "    from ...report import fit_text\n"          # 9: lazy, inside a function
        "    import importlib\n"
        "    return importlib.import_module('motes.optics.mie')\n")   # 11
    assert _imports("motes.dust.fit.run", path) == [
        (2, "motes"), (3, "motes.errors"), (4, "motes.dust.fit.sampler"), (5, "motes.dust.likelihood"),
        (6, "motes.dust.fit.spec"), (7, "motes.photometry.bands"), (9, "motes.report.fit_text"),
        (11, "motes.optics.mie")]
