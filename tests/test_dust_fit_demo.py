"""The disk-fit demo: committed inputs come from the generator's known truth, and they parse."""

from __future__ import annotations

import importlib.util
from pathlib import Path

import numpy as np

from motes.demo import disk_fit as demo_part
from motes.dust.fit.problem import read_fit_photometry
from motes.dust.fit.spec import read_fit_description

REPO = Path(__file__).resolve().parents[1]
SCRIPT = REPO / "examples" / "make_disk_demo.py"
DATA = REPO / "src" / "motes" / "demo" / "data"


def _generator():
    spec = importlib.util.spec_from_file_location("make_disk_demo", SCRIPT)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def test_generator_reproduces_committed_files(tmp_path):
    """Regenerate (exact optics path) and compare: the description byte for byte, the ratios to 1e-3
    relative (a tenth of a percent, 30x below the 3% noise: room for refinements of the exact
    quadrature that do not change the data's meaning)."""
    _generator().main(["--out", str(tmp_path)])
    assert (tmp_path / "disk_fit.toml").read_text() == (DATA / "disk_fit.toml").read_text()
    new = read_fit_photometry(read_fit_description(tmp_path / "disk_fit.toml"))
    old = read_fit_photometry(read_fit_description(DATA / "disk_fit.toml"))
    assert new.band_names == old.band_names
    assert np.allclose(new.value, old.value, rtol=1e-3, atol=0)
    assert np.allclose(new.error, old.error, rtol=1e-3, atol=0)


def test_demo_inputs_parse(tmp_path):
    demo_part.write_inputs(tmp_path)
    spec = read_fit_description(tmp_path / "disk_fit.toml")
    obs = read_fit_photometry(spec)
    assert obs.n_detections == 8
    lam = obs.wavelength
    assert 0.6 <= lam.min() and lam.max() <= 4.0 and np.any(np.abs(lam - 3.1) < 0.05)
    assert [m.name for m in spec.models][0] == "silica+water_ice+carbon+iron"
    assert len(spec.models) == 4            # full set and each non-kept material removed in turn
