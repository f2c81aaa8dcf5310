"""Benchmark: type a 10-band companion against >= 200 templates.

Templates: the built-in dwarf sequence at 0.1-subtype steps (M0-T9: 291
templates) plus a synthetic library of 60 labelled spectra (smooth invented
shapes, absolutely calibrated), and the blackbody fallback (197 templates),
which runs because one band (an L'-like top-hat) is covered by nothing else.
Both modes (distance-known and colours-only) are ranked.

Baseline, measured in the same run: one pass of plain numpy chi^2 over the same
template arrays (best offset per template, sum of squared normalised residuals,
no limits, no normalisation terms, no summaries). The script prints the
in-process time of ``classify`` (median of repeats, after one warm-up call that
fills the synthetic-magnitude cache) and its ratio to that baseline.

Run: python benchmarks/bench_classify.py [--repeats N]
"""

from __future__ import annotations

import argparse
import math
import tempfile
import time
from pathlib import Path

import numpy as np


def _write_library(folder: Path, n: int, rng) -> None:
    from motes.companion.blackbody import R_JUP_PC
    from motes.companion.spectral_types import type_label
    from motes.photometry.spectra import blackbody_flux_lambda

    wl = np.geomspace(0.4, 6.0, 2000)
    entries = []
    for i, code in enumerate(np.linspace(60, 89, n)):
        teff = 3900.0 * math.exp(-(code - 60) / 16.0)
        # an invented water-band-like depression, deeper for cooler objects
        depth = 1 - 0.5 * (1 - teff / 4000) * np.exp(-0.5 * ((wl - 1.4) / 0.08) ** 2)
        flux = math.pi * blackbody_flux_lambda(wl, teff) * depth * (R_JUP_PC * 1.1 / 10) ** 2
        flux *= 1 + 0.01 * rng.standard_normal(wl.size)
        name = f"s{i:03d}.txt"
        (folder / name).write_text("\n".join(f"{w:.6f} {f:.6e}" for w, f in zip(wl, flux)) + "\n")
        entries.append(f'[[spectrum]]\nfile = "{name}"\nspectral_type = "{type_label(code)}"\nteff_k = {teff:.0f}\n')
    (folder / "motes-library.toml").write_text(
        '[library]\nname = "benchmark"\nwavelength_unit = "um"\nflux_unit = "W m-2 um-1"\n'
        'calibration = "at_10pc"\n\n' + "\n".join(entries))


def main(argv=None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=7)
    parser.add_argument("--library-size", type=int, default=60)
    args = parser.parse_args(argv)

    from motes.companion import (ClassifySettings, classify, load_dwarf_sequence, photometry_from_magnitudes,
                                 read_library)
    from motes.photometry import top_hat_band

    rng = np.random.default_rng(20261201)
    seq = load_dwarf_sequence()
    bands = ("cousins_r", "cousins_i", "gaia_g", "gaia_rp", "2mass_j", "2mass_h", "2mass_ks", "wise_w1",
             "wise_w2")
    mu = 5 * math.log10(18.0 / 10)
    mags = {b: (float(seq.value(b, "M6.5")) + mu + rng.normal(0, 0.03), 0.03) for b in bands}
    mags["Lp"] = (float(seq.value("wise_w1", "M6.5")) + mu - 0.05, 0.08)
    phot = photometry_from_magnitudes(mags, distance_pc=18.0, distance_pc_error=0.1,
                                      bands={"Lp": top_hat_band("Lp", 3.75, 0.7)})
    settings = ClassifySettings(mode="both", type_range=("M0", "T9"), blackbody="always")
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp) / "lib"
        folder.mkdir()
        _write_library(folder, args.library_size, rng)
        library = read_library(folder, cache_dir=Path(tmp) / "cache")
        start = time.perf_counter()
        result = classify(phot, settings, library=library)  # warm-up: synthesis, caches, imports
        warm = time.perf_counter() - start
        times = []
        for _ in range(args.repeats):
            start = time.perf_counter()
            result = classify(phot, settings, library=library)
            times.append(time.perf_counter() - start)
    ranked = {f"{r.source} / {r.mode}": len(r.labels) for r in result.rankings}

    # baseline: plain numpy chi^2 over the same arrays (sequence grid + library + blackbodies)
    obs_bands = phot.bands()
    arrays = [seq.grid(obs_bands, step=0.1, code_range=(60, 89)).magnitudes,
              library.grid(obs_bands).magnitudes]
    from motes.companion import BlackbodySet

    arrays.append(BlackbodySet().grid(obs_bands).magnitudes)
    model = np.vstack(arrays)
    model = np.where(np.isfinite(model), model, 0.0)
    obs = np.array([r.apparent_mag for r in phot.rows])
    sig = np.array([r.apparent_mag_error for r in phot.rows])
    w = 1 / sig**2
    base = []
    for _ in range(max(args.repeats, 20)):
        start = time.perf_counter()
        resid = obs[None, :] - model
        delta = (resid * w).sum(axis=1) / w.sum()
        chi2 = (((resid - delta[:, None]) ** 2) * w).sum(axis=1)
        base.append(time.perf_counter() - start)
    assert chi2.shape == (model.shape[0],)
    t_classify, t_base = float(np.median(times)), float(np.median(base))
    print(f"companion: {len(phot.rows)} bands (M6.5 at 18 pc, one L'-like top-hat band)")
    print(f"  templates: sequence grid 291 (M0-T9, 0.1 subtype) + library {len(library)} + blackbodies 197 (blackbody=\"always\") "
          f"= {model.shape[0]} (the baseline arrays)")
    print("  templates left in each final ranking (the sequence's first pass over the shared bands "
          "evaluates all 291):")
    for key, n in ranked.items():
        print(f"    {key}: {n}")
    print(f"  classify, first call (synthesis + caches): {warm * 1e3:.1f} ms")
    print(f"  classify, in-process median of {args.repeats}:   {t_classify * 1e3:.1f} ms")
    print(f"  baseline numpy chi^2, one pass:            {t_base * 1e3:.3f} ms")
    print(f"  ratio classify / baseline:                 {t_classify / t_base:.0f}x")
    print(f"  estimate: {result.estimate.label} [{result.estimate.source}, {result.estimate.mode}]")


if __name__ == "__main__":
    main()
