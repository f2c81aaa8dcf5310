"""The demo's joint scattered-light + thermal part: inputs from the generator's truth, a short run, the full run.

The full part (``pytest -m slow``) runs the demo's own settings and checks the
verdict it prints; the fast tests check the committed inputs and run the part
on them with 10 live points and at most 200 likelihood calls per run, no
figures (the plumbing: the six evidence runs, the files, the printed ln B and
caveats).
"""

from __future__ import annotations

import importlib.util
import re
from pathlib import Path

import numpy as np
import pytest

from motes.demo import joint_fit as demo_part
from motes.dust.fit.problem import read_fit_photometry
from motes.dust.fit.spec import read_fit_description

REPO = Path(__file__).resolve().parents[1]
SCRIPT = REPO / "examples" / "make_joint_demo.py"
DATA = REPO / "src" / "motes" / "demo" / "data"


def _generator():
    spec = importlib.util.spec_from_file_location("make_joint_demo", SCRIPT)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def _values(path: Path) -> tuple[list, np.ndarray, np.ndarray]:
    rows = [line.split(",") for line in path.read_text().splitlines()[2:]]
    return [r[0] for r in rows], np.array([float(r[2]) for r in rows]), np.array([float(r[3]) for r in rows])


def test_generator_reproduces_committed_files(tmp_path):
    """Regenerate (exact optics and thermal paths) and compare: the description byte for byte, the values
    to 1e-3 relative (30x below the 3-5% noise: room for refinements of the exact quadratures that do
    not change the data's meaning)."""
    _generator().main(["--out", str(tmp_path)])
    assert (tmp_path / "joint_fit.toml").read_text() == (DATA / "joint_fit.toml").read_text()
    for name in ("joint_scattered.csv", "joint_thermal.csv"):
        new, old = _values(tmp_path / name), _values(DATA / name)
        assert new[0] == old[0]
        assert np.allclose(new[1], old[1], rtol=1e-3, atol=0)
        assert np.allclose(new[2], old[2], rtol=1e-3, atol=0)


def test_demo_inputs_copy_and_parse(tmp_path):
    demo_part.write_inputs(tmp_path)
    for name in demo_part.INPUT_FILES:
        assert (tmp_path / name).read_bytes() == (DATA / name).read_bytes()
        assert "INVENTED" in (tmp_path / name).read_text().splitlines()[0]
    spec = read_fit_description(tmp_path / "joint_fit.toml")
    assert [m.name for m in spec.models] == ["silicate+carbon", "silicate"]   # is carbon needed?
    assert spec.thermal is not None and spec.thermal.verdicts_by_data
    assert spec.thermal.ring_radius.kind == "fixed" and spec.thermal.ring_radius.value == 5.0
    assert read_fit_photometry(spec).n_detections == 5
    from motes.dust.fit.joint_run import read_fit_thermal

    thermal = read_fit_thermal(spec)
    assert thermal.n_detections == 5 and not np.any(thermal.is_limit)
    truth = _generator().TRUTH
    assert demo_part.DEMO_JOINT_TRUTH["fractions"] == truth["fractions"]
    assert all(demo_part.DEMO_JOINT_TRUTH[k] == truth[k] for k in ("porosity", "a_min", "q", "ring_radius"))


def _short_inputs(folder: Path, nlive: int, maxcall: int) -> None:
    demo_part.write_inputs(folder)
    path = folder / "joint_fit.toml"
    text, n = re.subn(r"(?m)^nlive = \d+.*$", f"nlive = {nlive}\nmaxcall = {maxcall}", path.read_text())
    assert n == 1
    path.write_text(text)


def test_short_run_prints_the_verdict_and_which_data_drove_it(tmp_path, capsys, monkeypatch):
    """The part on the demo inputs, each run cut at 200 calls (a twentieth of the demo's work): it writes
    its run folder and prints the three ln B, the verdict and the caveats. (Cut runs: the numbers are
    not the demo's; the full part is the slow test below.)"""
    _short_inputs(tmp_path, 10, 200)
    monkeypatch.setattr(demo_part, "write_inputs", lambda folder: None)      # keep the shortened copy
    demo_part.run(tmp_path, progress=False, figures=False)
    out = capsys.readouterr().out
    assert re.search(r"carbon: (needed|undecided|not needed) \(ln B = ", out)
    assert re.search(r"scattered light alone [+-]\d+\.\d\d ± \d\.\d\d, the thermal SED alone \+\d+\.\d\d", out)
    assert "Caveats:" in out and "extrapolated" in out and "Truth (invented)" in out
    run = tmp_path / "joint_fit_run"
    for name in ("ranking.ecsv", "verdicts.ecsv", "summary.txt"):
        assert (run / name).is_file(), name
    for part in ("scattered", "thermal"):
        assert (run / "models" / "silicate+carbon" / "by_data" / part / "result.json").is_file()


def test_a_part_marked_runs_apart_runs_in_a_second_process(tmp_path, capsys, monkeypatch):
    """run_demo with 2 workers: a RUNS_APART part runs in a spawned process; its output comes in its turn."""
    import motes.demo as demo
    from motes.demo import photometry

    monkeypatch.setattr(photometry, "RUNS_APART", True, raising=False)
    demo.run_demo(tmp_path, parts=["companion", "photometry"], workers=2)
    out = capsys.readouterr().out
    assert "photometry took" in out and "in a second process alongside the other parts" in out
    assert out.index("=== companion ===") < out.index("=== photometry ===") < out.index("in a second process")
    assert (tmp_path / "photometry" / "velmora_b_photometry.ecsv").is_file()
    demo.run_demo(tmp_path / "one", parts=["photometry"], workers=2)     # alone: nothing to overlap with
    assert "in a second process" not in capsys.readouterr().out


def test_a_second_process_that_dies_is_reported_not_waited_for(tmp_path):
    """A script without a main guard: spawn re-runs it in the child, which cannot start its own process
    and dies; run_demo says so (exit 1, one message) instead of waiting forever."""
    import subprocess
    import sys

    script = tmp_path / "unguarded.py"
    script.write_text("import sys\nimport motes.demo as demo\nfrom motes.demo import photometry\n"
                      "photometry.RUNS_APART = True\n"
                      "demo.run_demo(sys.argv[1], parts=['photometry', 'photometry'], workers=2)\n")
    done = subprocess.run([sys.executable, str(script), str(tmp_path / "out")], capture_output=True, text=True,
                          timeout=300)
    assert done.returncode != 0
    assert "stopped without a result" in done.stderr and "workers=1" in done.stderr


@pytest.mark.slow
def test_full_demo_part(tmp_path, capsys):
    """The demo's own settings: carbon needed, said by both data sets, truth inside the 95% interval."""
    from motes.demo import run_demo

    run_demo(tmp_path, parts=["joint_fit"])
    out = capsys.readouterr().out
    assert "carbon: needed" in out and "driven by both" in out
    from astropy.table import Table

    assert (tmp_path / "joint_fit_run" / "thermal_sed.png").is_file()
    verdicts = Table.read(tmp_path / "joint_fit_run" / "verdicts.ecsv")
    row = verdicts[list(verdicts["material"]).index("carbon")]
    assert row["ln_b_thermal"] > 10 and row["ln_b_scattered"] >= 1 and row["driven_by"] == "both"
    params = Table.read(tmp_path / "joint_fit_run" / "models" / "silicate+carbon" / "parameters.ecsv")
    frac = params[list(params["parameter"]).index("fraction_carbon")]
    assert frac["lo95"] <= demo_part.DEMO_JOINT_TRUTH["fractions"]["carbon"] <= frac["hi95"]
