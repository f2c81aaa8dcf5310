"""Monochromatic model curves of a finished fit (for the colour figure)."""

from __future__ import annotations

import numpy as np
import pytest

from motes.dust.fit.curves import curve_wavelengths, posterior_curves
from motes.dust.fit.run import FitRunSettings, run_fit

from dust_fit_toys import toy_factory, write_toy_fit

TRUTH = {"fractions": {"alpha": 0.6, "beta": 0.4, "gamma": 0.0}, "porosity": 0.3, "a_min": 2.0, "q": 3.6}
PARAMETERS = ('porosity = { prior = "uniform", lower = 0.0, upper = 0.8 }\n'
              'a_min = { prior = "log-uniform", lower = 0.5, upper = 10.0 }\n'
              'q = { prior = "uniform", lower = 3.0, upper = 4.5 }\n'
              'a_max = 20.0\n')          # small grains only: the real Mie curves below stay cheap


def tiny_mie_factory(spec, materials, bands):
    """The description's real DiskColourModel with the coarse size quadrature of the grid tests."""
    from test_dust_grid import TINY_SIZES

    from motes.dust.model.colours import DiskColourModel

    d = spec.description.subset(materials)
    return DiskColourModel(d.materials, bands, star_teff=d.star.teff, star_spectrum=d.star.spectrum,
                           mixing=d.mixing, matrix=d.matrix, geometry=d.geometry, method="exact", a_max=20.0,
                           wavelength_nodes=d.wavelength_nodes, size_sampling=TINY_SIZES)


@pytest.fixture(scope="module")
def toy_result(tmp_path_factory):
    folder = tmp_path_factory.mktemp("fit")
    desc = write_toy_fit(folder, TRUTH, rng=np.random.default_rng(4), parameters=PARAMETERS,
                         sampler="nlive = 40\ndlogz = 1.0\nseed = 3\n")
    return run_fit(desc, FitRunSettings(output=folder / "run", progress=False), model_factory=toy_factory,
                   echo=lambda *a, **k: None)


def test_a_model_without_a_monochromatic_path_gives_no_curves(toy_result):
    assert posterior_curves(toy_result, model_factory=toy_factory) == {}


def test_curves_of_the_real_model_follow_the_posterior_draws(toy_result):
    wl = np.geomspace(1.0, 4.0, 7)
    curves = posterior_curves(toy_result, n_models=1, n_draws=4, wavelength=wl, model_factory=tiny_mie_factory,
                              rng=np.random.default_rng(1))
    best = toy_result.best
    curve = curves[best.name]
    assert curve.wavelength is not None and curve.median.shape == (7,) and curve.n_draws == 4
    assert np.all(curve.lo68 <= curve.median) and np.all(curve.median <= curve.hi68)
    assert np.all(np.isfinite(curve.best)) and np.all(curve.best > 0)
    assert curve.angles_deg == (90.0,)
    # bookkeeping: the best curve is the scale times the model at the best parameters, columns mapped by name
    model = tiny_mie_factory(_spec(toy_result), best.materials, toy_result.observations.bands)
    f = [best.best[f"fraction_{m}"] for m in best.materials]
    direct = model.monochromatic_flux_ratio(wl, [f], best.best["porosity"], best.best["a_min"], best.best["q"],
                                            a_max=20.0)[0] * best.best["scale"]
    np.testing.assert_allclose(curve.best, direct, rtol=1e-12)


def _spec(result):
    from motes.dust.fit.spec import read_fit_description

    return read_fit_description(result.source)


def test_curve_wavelengths_span_the_bands(toy_result):
    bands = toy_result.observations.bands
    wl = curve_wavelengths(bands)
    assert wl[0] < min(b.pivot_wavelength for b in bands) and wl[-1] > max(b.pivot_wavelength for b in bands)
    assert np.all(np.diff(np.log(wl)) > 0)
