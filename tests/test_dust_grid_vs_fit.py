"""The grid and the nested-sampling fit agree on the best chi-square.

The same data and the same forward model go through ``motes grid`` and
``motes fit`` (the fit's maximum-likelihood point over its dead points, with
the best scale). Two checks (issue 6; parameters can be degenerate, so
chi-square values are compared, not positions):

* the grid's best chi2 is no better than the fit's maximum-likelihood chi2,
  within ``TOLERANCE``: the fit searches the continuous parameter space that
  contains every grid point, but its maximum is the best of a finite set of
  dead points, not the exact optimum;
* the grid's best chi2 is no worse than the chi2 of the grid point nearest to
  the fit's maximum-likelihood point.

The forward model is the analytic stand-in of ``test_dust_grid.py`` plugged
into both runners through their model-factory hooks, so that the nested
sampler runs in seconds; both runners take the chi-square from
``motes.dust.likelihood.chi_square_with_best_scale``.
"""

from __future__ import annotations

import numpy as np
import pytest

from motes.dust.grid.spec import read_grid_description
from motes.dust.grid.run import GridRunSettings, run_grid
from motes.dust.grid.store import GridStore

from test_dust_grid import StandInModel, grid_text, standin_factory, write_photometry

#: Allowed excess of the fit's maximum-likelihood chi2 over the grid's best: Delta chi2 = 1, the
#: one-parameter 68% profile level (Wilks 1938), below which two fits are not distinguishable.
TOLERANCE = 1.0


def fit_standin_factory(spec, materials, bands):
    return StandInModel(len(materials), [b.pivot_wavelength for b in bands])


FIT_SECTIONS = """
[parameters]
porosity = { prior = "uniform", lower = 0.0, upper = 0.6 }
a_min = { prior = "log-uniform", lower = 0.5, upper = 4.0 }
q = 3.5
a_max = 1000.0

[scale]
lower = 1e-3
upper = 1e3

[models]
set = "list"
list = [["silica", "carbon", "ice"]]

[sampler]
nlive = 200
dlogz = 0.2
sample = "rwalk"
seed = 3
n_posterior = 200
"""


def test_grid_best_chi2_brackets_the_nested_sampling_maximum(tmp_path, rng):
    pytest.importorskip("dynesty", reason="the fit runs dynesty")
    from motes.dust.fit.run import FitRunSettings, run_fit
    from motes.dust.fit.spec import read_fit_description

    write_photometry(tmp_path, rng=rng, truth={"fractions": [0.47, 0.31, 0.22], "porosity": 0.27,
                                               "a_min": 1.7, "q": 3.5})
    grid_path = tmp_path / "grid.toml"
    grid_path.write_text(grid_text(porosity="{ start = 0.0, stop = 0.6, num = 7 }",
                                   a_min='{ start = 0.5, stop = 4.0, num = 10, spacing = "log" }'))
    spec = read_grid_description(grid_path)
    run_grid(spec, tmp_path / "store", GridRunSettings(workers=1, progress=False), model_factory=standin_factory)
    table = GridStore.open(tmp_path / "store").read_table(["key", "chi2"]).to_pandas().set_index("key")
    grid_best = float(table["chi2"].min())

    fit_path = tmp_path / "fit.toml"
    fit_text = grid_text().split("[grid]")[0] + FIT_SECTIONS
    fit_path.write_text(fit_text)
    result = run_fit(read_fit_description(fit_path),
                     FitRunSettings(output=tmp_path / "fit", workers=1, progress=False),
                     model_factory=fit_standin_factory, echo=lambda *a: None)
    model = result.models[0]
    fit_best = model.best_chi2

    best = model.best
    fractions = np.array([best[f"fraction_{m}"] for m in spec.materials])
    nearest = spec.nearest_key(fractions, best["porosity"], best["a_min"], 3.5, 1000.0)
    nearest_chi2 = float(table.loc[nearest, "chi2"])

    print(f"grid best chi2 {grid_best:.4f}, fit maximum-likelihood chi2 {fit_best:.4f}, nearest grid point {nearest_chi2:.4f}")
    assert grid_best >= fit_best - TOLERANCE, (grid_best, fit_best)
    assert grid_best <= nearest_chi2, (grid_best, nearest_chi2)
