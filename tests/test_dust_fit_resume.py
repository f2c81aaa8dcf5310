"""Kill a real ``motes fit`` with SIGKILL mid-run, restart it, compare with an uninterrupted run.

The forward model is the real one (exact Mie path) on a deliberately tiny
problem (2 materials, 4 top-hat bands, one wavelength node per band, grains of
1-5 um) so that a run takes seconds.
"""

from __future__ import annotations

import json
import math
import os
import signal
import subprocess
import sys
import time

import numpy as np
import pytest

TOML = """
[data]
photometry = "disk.csv"

[star]
teff = 5600.0

[[materials]]
name = "silica"
source = "silica_amorphous"

[[materials]]
name = "water_ice"
source = "water_ice_crystalline"

[model]
method = "exact"
a_max = 5.0
wavelength_nodes = 1

[bands.B1]
shape = "top-hat"
centre_um = 1.0
width_um = 0.1

[bands.B2]
shape = "top-hat"
centre_um = 2.0
width_um = 0.2

[bands.B3]
shape = "top-hat"
centre_um = 3.1
width_um = 0.1

[bands.B4]
shape = "top-hat"
centre_um = 3.8
width_um = 0.2

[parameters]
porosity = 0.3
a_min = { prior = "log-uniform", lower = 1.0, upper = 3.0 }
q = 3.5
a_max = 5.0

[scale]
lower = 1e-6
upper = 1e-1

[models]
set = "list"
list = [["silica"], ["silica", "water_ice"]]

[sampler]
nlive = 25
dlogz = 1.0
seed = 2
checkpoint_every = 1.0
"""


def _write_inputs(folder, rng):
    from motes.dust.model import DiskColourModel
    from motes.photometry.bands import top_hat_band

    bands = [top_hat_band("B1", 1.0, 0.1), top_hat_band("B2", 2.0, 0.2), top_hat_band("B3", 3.1, 0.1),
             top_hat_band("B4", 3.8, 0.2)]
    model = DiskColourModel(["silica_amorphous", "water_ice_crystalline"], bands, star_teff=5600.0,
                            method="exact", a_max=5.0, wavelength_nodes=1)
    r = 1e-3 * model.flux_ratio([[0.7, 0.3]], 0.3, 1.6, 3.5)[0]
    v = r * (1 + 0.03 * rng.normal(size=4))
    rows = "\n".join(f"B{i + 1},{x:.6e},{0.03 * t:.6e}" for i, (x, t) in enumerate(zip(v, r)))
    (folder / "disk.csv").write_text("band,value,error\n" + rows + "\n")
    (folder / "fit.toml").write_text(TOML)


def _motes(*args, **kw):
    return [sys.executable, "-m", "motes", "fit", *map(str, args)]


def test_sigkill_and_resume_with_two_workers(tmp_path, rng):
    _write_inputs(tmp_path, rng)
    env = dict(os.environ, PYTHONUNBUFFERED="1")
    # uninterrupted reference run, one worker
    ref = subprocess.run(_motes(tmp_path / "fit.toml", "--output", tmp_path / "ref", "--quiet", "--no-figures"),
                         capture_output=True, text=True, env=env, timeout=600)
    assert ref.returncode == 0, ref.stderr

    # interrupted run: wait until the first model is finished and the second has checkpointed, then SIGKILL
    out = tmp_path / "run"
    proc = subprocess.Popen(_motes(tmp_path / "fit.toml", "--output", out, "--quiet", "--no-figures"),
                            stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, env=env)
    first = out / "models" / "silica" / "result.json"
    second = out / "models" / "silica+water_ice" / "sampler_state.dynesty"
    deadline = time.time() + 300
    try:
        while time.time() < deadline and proc.poll() is None:
            if first.exists() and second.exists():
                break
            time.sleep(0.2)
        assert proc.poll() is None, "the run finished before it could be interrupted"
        assert first.exists() and second.exists(), "no checkpoint within 300 s"
        os.kill(proc.pid, signal.SIGKILL)
    finally:
        proc.wait(timeout=60)
    assert not (out / "models" / "silica+water_ice" / "result.json").exists()
    first_before = json.loads(first.read_text())

    resumed = subprocess.run(_motes(tmp_path / "fit.toml", "--output", out, "--workers", 2, "--no-figures"),
                             capture_output=True, text=True, env=env, timeout=600)
    assert resumed.returncode == 0, resumed.stderr
    assert "finished earlier" in resumed.stdout and "resuming" in resumed.stdout

    # the finished model was not re-run
    first_after = json.loads(first.read_text())
    assert first_after == first_before and len(first_after["sessions"]) == 1
    # the interrupted model resumed from its checkpoint, and both workers evaluated the likelihood
    info = json.loads((out / "models" / "silica+water_ice" / "result.json").read_text())
    assert info["sessions"][-1]["resumed"] is True
    assert info["sessions"][-1]["processes"] == 2
    # same evidence as the uninterrupted run, within 3 combined standard errors
    ref_info = json.loads((tmp_path / "ref" / "models" / "silica+water_ice" / "result.json").read_text())
    diff = info["ln_z"] - ref_info["ln_z"]
    assert abs(diff) < 3 * math.hypot(info["ln_z_err"], ref_info["ln_z_err"]), (info["ln_z"], ref_info["ln_z"])
    print(f"resume test: ln Z resumed {info['ln_z']:.3f} ± {info['ln_z_err']:.3f}, "
          f"uninterrupted {ref_info['ln_z']:.3f} ± {ref_info['ln_z_err']:.3f}, sessions {info['sessions']}")
