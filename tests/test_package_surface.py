"""The public surface: every name a module exports exists, in a fresh interpreter."""

from __future__ import annotations

import importlib
import pkgutil
import subprocess
import sys

import motes


def _modules():
    for info in pkgutil.walk_packages(motes.__path__, prefix="motes."):
        if info.name.endswith("__main__"):
            continue
        yield info.name


def test_every_module_declares_all_and_exports_exist():
    missing = []
    for name in _modules():
        module = importlib.import_module(name)
        exported = getattr(module, "__all__", None)
        if exported is None:
            missing.append(f"{name}: no __all__")
            continue
        for attr in exported:
            if not hasattr(module, attr):
                missing.append(f"{name}.{attr}")
    assert not missing, missing


def test_exports_resolve_in_a_fresh_interpreter():
    code = (
        "import importlib, pkgutil, motes\n"
        "for i in pkgutil.walk_packages(motes.__path__, prefix='motes.'):\n"
        "    if i.name.endswith('__main__'): continue\n"
        "    m = importlib.import_module(i.name)\n"
        "    [getattr(m, a) for a in getattr(m, '__all__', [])]\n"
        "print('ok')\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=300)
    assert out.returncode == 0, out.stderr
    assert out.stdout.strip() == "ok"


def test_cli_help_for_every_subcommand(capsys):
    from motes.cli import build_parser, main

    parser = build_parser()
    subactions = [a for a in parser._actions if a.__class__.__name__ == "_SubParsersAction"]
    assert subactions, "no subcommands registered"
    names = list(subactions[0].choices)
    assert "demo" in names
    for name in names:
        try:
            main([name, "--help"])
        except SystemExit as exc:
            assert exc.code == 0
        out = capsys.readouterr().out
        assert f"usage: motes {name}" in out
        assert "%%" not in out, f"motes {name} --help prints a literal '%%'"
