"""motes never selects a matplotlib backend, and report/ still writes its figures.

Figures are drawn with matplotlib's object-oriented API, which needs no
backend: a user's backend (a notebook's, or one set with ``MPLBACKEND``)
stays what it was after importing every motes module and drawing.
"""

from __future__ import annotations

import importlib
import json
import os
import pkgutil
import subprocess
import sys

import motes
import motes.report

# Runs in a fresh interpreter: import every motes module, draw the cheap figures, report.
_CHILD = r"""
import importlib, json, pkgutil, sys
from pathlib import Path
import matplotlib
before = matplotlib.get_backend()
import motes, motes.report
for info in pkgutil.walk_packages(motes.__path__, prefix="motes."):
    if not info.name.endswith("__main__"):
        importlib.import_module(info.name)
for name in motes.report.__all__:
    getattr(motes.report, name)
after_import = matplotlib.get_backend()

import numpy as np
from motes.optics.constants import load_material
from motes.photometry import get_band
from motes.report import plot_band, plot_efficiencies, plot_optical_constants, plot_reflectance

out = Path(sys.argv[1])
bands = [get_band("2mass_j"), get_band("2mass_ks")]
lam = np.geomspace(1.0, 2.5, 20)
radius = np.geomspace(0.1, 10.0, 30)
q = np.ones((2, radius.size))
paths = [plot_band(bands[0], out / "band.png"),
         plot_optical_constants(load_material("iron"), out / "iron.png"),
         plot_reflectance(out / "reflectance.png", lam, 1e-2 / lam, bands, np.array([0.01, 0.005]), "t"),
         plot_efficiencies(out / "efficiencies.png", radius, 2 * q, q, np.array([1.2, 2.2]), ["J", "Ks"], "t")]
print(json.dumps({"before": before, "after_import": after_import, "after_drawing": matplotlib.get_backend(),
                  "pyplot": "matplotlib.pyplot" in sys.modules, "paths": [str(p) for p in paths]}))
"""


def test_importing_and_drawing_leave_the_backend_alone(tmp_path):
    env = dict(os.environ, MPLBACKEND="svg")
    run = subprocess.run([sys.executable, "-c", _CHILD, str(tmp_path)], capture_output=True, text=True,
                         env=env, timeout=300)
    assert run.returncode == 0, run.stderr
    seen = json.loads(run.stdout.strip().splitlines()[-1])
    assert seen["before"] == "svg"
    assert seen["after_import"] == "svg"
    assert seen["after_drawing"] == "svg"
    assert not seen["pyplot"], "a motes module imported matplotlib.pyplot"
    assert len(seen["paths"]) == 4
    for path in seen["paths"]:
        with open(path, "rb") as f:
            assert f.read(8) == b"\x89PNG\r\n\x1a\n", path


def test_report_reexports_every_public_name_of_its_modules():
    missing = []
    for info in pkgutil.iter_modules(motes.report.__path__, prefix="motes.report."):
        module = importlib.import_module(info.name)
        for name in module.__all__:
            if getattr(motes.report, name, None) is not getattr(module, name):
                missing.append(f"{info.name}.{name}")
    assert not missing, f"not re-exported by motes.report: {missing}"
    assert set(motes.report.__all__) <= set(dir(motes.report))
