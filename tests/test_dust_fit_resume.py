"""Kill a real ``motes fit`` with SIGKILL mid-run, restart it, compare with an uninterrupted run.

Default suite: the real command line (argument parsing, run folder, dynesty
checkpoints, process pool) driven by a small script that swaps in the analytic
stand-in forward model (``dust_fit_toys``), in the driver *and* in the spawned
workers (which re-import the script), so a run takes seconds.

Slow suite: the same with the real forward model (fast optics path) on the demo
disk; its first run builds the optics lookup tables, which can take minutes.
"""

from __future__ import annotations

import json
import math
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

TESTS = Path(__file__).resolve().parent

DRIVER = '''
import sys
sys.path.insert(0, {tests!r})
import dust_fit_toys
import motes.dust.fit.problem as fitmodel
fitmodel.build_colour_model = dust_fit_toys.toy_factory    # runs in the driver and in every spawned worker

if __name__ == "__main__":
    from motes.cli import main
    sys.exit(main(["fit"] + sys.argv[1:]))
'''


def _kill_and_resume(tmp_path, command, fit_toml, first_name, second_name, workers=2, timeout=900):
    env = dict(os.environ, PYTHONUNBUFFERED="1")
    ref = subprocess.run(command + [str(fit_toml), "--output", str(tmp_path / "ref"), "--quiet", "--no-figures"],
                         capture_output=True, text=True, env=env, timeout=timeout)
    assert ref.returncode == 0, ref.stderr[-2000:]

    out = tmp_path / "run"
    proc = subprocess.Popen(command + [str(fit_toml), "--output", str(out), "--quiet", "--no-figures"],
                            stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, env=env)
    first = out / "models" / first_name / "result.json"
    second = out / "models" / second_name / "sampler_state.dynesty"
    deadline = time.time() + timeout
    try:
        while time.time() < deadline and proc.poll() is None:
            if first.exists() and second.exists():
                break
            time.sleep(0.05)
        assert proc.poll() is None, "the run finished before it could be interrupted"
        assert first.exists() and second.exists(), "no checkpoint of the second model in time"
        os.kill(proc.pid, signal.SIGKILL)
    finally:
        proc.wait(timeout=60)
    assert not (out / "models" / second_name / "result.json").exists()
    first_before = json.loads(first.read_text())

    resumed = subprocess.run(command + [str(fit_toml), "--output", str(out), "--workers", str(workers),
                                        "--no-figures"], capture_output=True, text=True, env=env, timeout=timeout)
    assert resumed.returncode == 0, resumed.stderr[-2000:]
    assert "finished earlier" in resumed.stdout and "resuming" in resumed.stdout

    # the finished model was not re-run
    first_after = json.loads(first.read_text())
    assert first_after == first_before and len(first_after["sessions"]) == 1
    # the interrupted model continued from its checkpoint, and every worker evaluated the likelihood
    info = json.loads((out / "models" / second_name / "result.json").read_text())
    assert [s["resumed"] for s in info["sessions"]] == [True]
    assert info["sessions"][-1]["processes"] == workers
    # the same evidence as the uninterrupted run, within 3 combined standard errors
    ref_info = json.loads((tmp_path / "ref" / "models" / second_name / "result.json").read_text())
    assert abs(info["ln_z"] - ref_info["ln_z"]) < 3 * math.hypot(info["ln_z_err"], ref_info["ln_z_err"])
    print(f"\nresume: ln Z resumed {info['ln_z']:.3f} ± {info['ln_z_err']:.3f} "
          f"({info['n_calls']} calls), uninterrupted {ref_info['ln_z']:.3f} ± {ref_info['ln_z_err']:.3f} "
          f"({ref_info['n_calls']} calls); sessions {info['sessions']}")
    return info, ref_info


def test_sigkill_and_resume_with_two_workers(tmp_path, rng):
    from dust_fit_toys import write_toy_fit

    truth = {"fractions": {"alpha": 0.6, "beta": 0.4}, "porosity": 0.3, "a_min": 2.0, "q": 3.6}
    path = write_toy_fit(tmp_path, truth, ("alpha", "beta"), rng=rng, model_set="list",
                         sampler="nlive = 200\ndlogz = 0.1\nseed = 2\ncheckpoint_every = 0.5\n")
    path.write_text(path.read_text().replace('set = "list"', 'set = "list"\nlist = [["alpha"], ["alpha", "beta"]]'))
    driver = tmp_path / "motes_fit_driver.py"
    driver.write_text(DRIVER.format(tests=str(TESTS)))
    _kill_and_resume(tmp_path, [sys.executable, str(driver)], path, "alpha", "alpha+beta")


@pytest.mark.slow
def test_sigkill_and_resume_real_model(tmp_path):
    """The demo disk with the real forward model (fast path), two models, SIGKILL, resume with 2 workers."""
    from importlib import resources
    import re

    data = resources.files("motes.demo") / "data"
    (tmp_path / "disk_photometry.ecsv").write_bytes((data / "disk_photometry.ecsv").read_bytes())
    text = (data / "disk_fit.toml").read_text()
    text = re.sub(r"^\[models\].*?(?=^\[)", '[models]\nset = "list"\nlist = [["silica", "water_ice"], '
                  '["silica", "water_ice", "carbon"]]\n\n', text, flags=re.S | re.M)
    text = re.sub(r"\[sampler\].*", "[sampler]\nnlive = 150\ndlogz = 0.2\nseed = 3\ncheckpoint_every = 1.0\n",
                  text, flags=re.S)
    (tmp_path / "fit.toml").write_text(text)
    _kill_and_resume(tmp_path, [sys.executable, "-m", "motes", "fit"], tmp_path / "fit.toml",
                     "silica+water_ice", "silica+water_ice+carbon", timeout=3000)
