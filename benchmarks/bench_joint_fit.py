"""A 4-material joint (scattered light + thermal) evidence fit against the scattered-light-only fit.

Issue 13's goal: the joint fit takes at most twice the scattered-light-only
fit of the same problem. Both fits here have the same materials (amorphous
silica, crystalline water ice, amorphous carbon, iron; each with its
extrapolation rule), priors (fractions and a_min free; porosity, q, a_max and the
ring radius fixed: five scattered-light bands hold at most five free
parameters), one model (all four materials), the same sampler settings and
seed, and are run one after the other in one process. The data are invented
(the fast models at a fixed mixture plus 3% / 5% noise; a benchmark, not a
validation). Tables are built before the clock starts (``prepare_fit`` and one
untimed run of each fit; the timed run is the second, same seed).

Reported: wall time and CPU time of this process and its children (the
machine may be shared: CPU time is the fairer measure), likelihood calls, and the time per call;
then the ratios joint / scattered-only. ``verdicts_by_data`` is off: it adds
the runs on each data set alone (about three times the joint runs).

Run::

    MOTES_CACHE_DIR=/tmp/cache python benchmarks/bench_joint_fit.py [--nlive 100]
"""

from __future__ import annotations

import argparse
import tempfile
import time
from pathlib import Path

import numpy as np

MATERIALS = {"silica": ("silica_amorphous", "dielectric"), "ice": ("water_ice_crystalline", "dielectric"),
             "carbon": ("carbon_amorphous", "conductor"), "iron": ("iron", "conductor")}
WEIGHTS = {"silica": 0.6, "ice": 0.25, "carbon": 0.1, "iron": 0.05}     # truth fractions (renormalised)
TRUTH = { "porosity": 0.3, "a_min": 3.0, "q": 3.5, "a_max": 1000.0,
         "radius": 60.0, "scale": 2e-3, "cross_section": 5.0}
SCATTERED = ("2mass_j", "2mass_h", "2mass_ks", "wise_w1", "spitzer-irac_4.5")
THERMAL = ("wise_w3", "wise_w4", "herschel-pacs_70", "herschel-pacs_160", "herschel-spire_250")


def _text(nlive: int, thermal: bool, names) -> str:
    mats = "\n".join(f'[[materials]]\nname = "{n}"\nsource = "{MATERIALS[n][0]}"\nextrapolation = "{MATERIALS[n][1]}"\n'
                      for n in names)
    model = ", ".join(f'"{n}"' for n in names)
    data = 'photometry = "colours.csv"\n' + ('thermal = "sed.csv"\n' if thermal else "")
    extra = (f'ring_radius = {TRUTH["radius"]}\n' if thermal else "")
    tail = ('[thermal]\ndistance_pc = 20.0\ncalibration = 0.05\nverdicts_by_data = false\n' if thermal else "")
    return (f"[data]\n{data}\n[star]\nteff = 5800.0\nluminosity = 1.0\nmass = 1.0\n\n{mats}\n"
            "[mixing]\nrule = \"bruggeman\"\n\n[geometry]\nangles_deg = [90.0]\n\n[parameters]\n"
            f"porosity = {TRUTH['porosity']}\n"
            "a_min = { prior = \"log-uniform\", lower = 0.5, upper = 20.0 }\n"
            f"q = {TRUTH['q']}\n{extra}\n{tail}\n[models]\nset = \"list\"\nlist = [[{model}]]\n\n"
            f"[sampler]\nnlive = {nlive}\ndlogz = 0.5\nseed = 1\n")


def _write_data(folder: Path, names) -> None:
    import tomllib

    from motes.dust.model.description import parse_model_description
    from motes.dust.model.thermal_fast import ThermalRingModel
    from motes.photometry.bands import get_band

    desc = parse_model_description(tomllib.loads(_text(10, True, names)), base_dir=folder, source="bench")
    rng = np.random.default_rng(13)
    t = dict(TRUTH)
    w = np.array([WEIGHTS[n] for n in names])
    t["fractions"] = list(w / w.sum())
    colours = desc.build_model(bands=[get_band(b) for b in SCATTERED])
    r = colours.flux_ratio([t["fractions"]], t["porosity"], t["a_min"], t["q"], a_max=t["a_max"])[0] * t["scale"]
    lines = ["band,value,error"] + [f"{b},{v * (1 + 0.03 * rng.normal()):.6e},{0.03 * v:.6e}" for b, v in zip(SCATTERED, r)]
    (folder / "colours.csv").write_text("\n".join(lines) + "\n")
    th = ThermalRingModel(desc, [get_band(b) for b in THERMAL], distance_pc=20.0)
    f = th.evaluate([t["fractions"]], t["porosity"], t["a_min"], t["a_max"], t["q"], t["radius"])[0] * t["cross_section"]
    lines = ["band,value,error,unit"] + [f"{b},{v * (1 + 0.05 * rng.normal()):.6e},{0.05 * v:.6e},Jy"
                                         for b, v in zip(THERMAL, f)]
    (folder / "sed.csv").write_text("\n".join(lines) + "\n")


def _cpu() -> float:
    """CPU seconds of this process and its finished children (tile builders)."""
    import resource

    return sum(resource.getrusage(w).ru_utime + resource.getrusage(w).ru_stime
               for w in (resource.RUSAGE_SELF, resource.RUSAGE_CHILDREN))


def _run(folder: Path, name: str, nlive: int, thermal: bool, names) -> dict:
    from motes.dust.fit.run import FitRunSettings, prepare_fit, run_fit
    from motes.dust.fit.spec import read_fit_description

    path = folder / f"{name}.toml"
    path.write_text(_text(nlive, thermal, names))
    spec = read_fit_description(path)
    prepare_fit(spec)                          # tables built (and cached) before the clock starts
    # a first run builds the few tiles the sampler reaches beyond the prior's draws; the second is timed
    run_fit(spec, FitRunSettings(output=folder / f"{name}_warm", progress=False), echo=lambda *a: None)
    wall, cpu = time.perf_counter(), _cpu()
    res = run_fit(spec, FitRunSettings(output=folder / f"{name}_run", progress=False), echo=lambda *a: None)
    wall, cpu = time.perf_counter() - wall, _cpu() - cpu
    m = res.models[0]
    return {"wall": wall, "cpu": cpu, "calls": m.n_calls, "ln_z": m.ln_z, "ln_z_err": m.ln_z_err}


def main(argv=None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--nlive", type=int, default=100)
    parser.add_argument("--materials", default=",".join(MATERIALS),
                        help="comma-separated subset of silica, ice, carbon, iron (default: all four)")
    args = parser.parse_args(argv)
    names = [n.strip() for n in args.materials.split(",")]
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        _write_data(folder, names)
        out = {k: _run(folder, k, args.nlive, k == "joint", names) for k in ("scattered", "joint")}
    for k, v in out.items():
        print(f"{k:>9}: wall {v['wall']:7.1f} s, cpu {v['cpu']:7.1f} s, {v['calls']:6d} calls, "
              f"{1e3 * v['cpu'] / v['calls']:.3f} ms cpu per call, ln Z = {v['ln_z']:.2f} ± {v['ln_z_err']:.2f}")
    s, j = out["scattered"], out["joint"]
    print(f"joint / scattered-only: wall {j['wall'] / s['wall']:.2f}x, cpu {j['cpu'] / s['cpu']:.2f}x, "
          f"calls {j['calls'] / s['calls']:.2f}x, cpu per call {(j['cpu'] / j['calls']) / (s['cpu'] / s['calls']):.2f}x "
          f"(nlive {args.nlive}, materials {', '.join(names)})")


if __name__ == "__main__":
    main()
