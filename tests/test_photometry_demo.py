"""The photometry demo: committed inputs are reproducible from known truth, and the part runs."""

from __future__ import annotations

import importlib.util
import math
from pathlib import Path

from motes.demo import photometry as demo_part
from motes.photometry import calibrate, read_target

REPO = Path(__file__).resolve().parents[1]
SCRIPT = REPO / "examples" / "make_photometry_demo.py"
DATA = REPO / "src" / "motes" / "demo" / "data"


def _generator():
    spec = importlib.util.spec_from_file_location("make_photometry_demo", SCRIPT)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def test_generator_reproduces_committed_files(tmp_path):
    written = _generator().generate(tmp_path)
    assert sorted(p.name for p in written) == sorted(demo_part.INPUT_FILES)
    for path in written:
        assert path.read_bytes() == (DATA / path.name).read_bytes(), f"{path.name} differs: re-run {SCRIPT.name}"


def test_demo_recovers_the_truth_within_errors(tmp_path):
    gen = _generator()
    demo_part.write_inputs(tmp_path)
    res = calibrate(read_target(tmp_path / demo_part.TARGET_FILE))
    assert {r.band.name for r in res.rows} == set(gen.TRUTH)
    true_mu = 5 * math.log10(gen.HOST["distance_pc"] / 10)
    for r in res.rows:
        if r.is_limit:
            assert r.absolute_mag < gen.TRUTH[r.band.name]  # the limit is brighter than the (fainter) truth
            continue
        total = (r.absolute_mag_error**2 + res.distance_modulus_error**2) ** 0.5
        # 4 sigma: a loose but honest bound for six draws (common practice, no source)
        assert abs(r.absolute_mag - gen.TRUTH[r.band.name]) < 4 * total, r.band.name
    assert abs(res.distance_modulus - true_mu) < 4 * res.distance_modulus_error
    assert res.row("Lp").host_synthesised and res.row("NB3p1").host_synthesised
    assert res.row("Lp").band.approximate and not res.row("NB3p1").band.approximate


def test_demo_part_runs_and_writes(tmp_path, capsys):
    demo_part.write_inputs(tmp_path)
    demo_part.run(tmp_path)
    out = capsys.readouterr().out
    assert "Velmora b" in out and "distance modulus" in out
    assert (tmp_path / "photometry" / "velmora_b_photometry.ecsv").is_file()
    assert (tmp_path / "photometry" / "velmora_b_photometry.csv").is_file()
