"""Total and polarised intensity from one Mie pass are bit-identical to the two separate passes.

``motes optics`` (and the demo's optics part) needs both; computing them in
one pass halves its exact-path cost. The numbers it prints must not move, so
the checks are exact equality, not a tolerance.
"""

from __future__ import annotations

import numpy as np
import pytest

from motes.dust.model.colours import DiskColourModel, ScatteringGeometry
from motes.dust.model.sampling import SizeSampling
from motes.optics import mie
from motes.optics.constants import Material
from motes.photometry.bands import top_hat_band


def test_scattered_intensities_equal_the_separate_functions(rng):
    m = (1.2 + 0.8 * rng.uniform(size=200)) + 1j * 10 ** rng.uniform(-4, 0.5, size=200)
    x = 10 ** rng.uniform(-2, 2, size=200)
    theta = np.radians([35.0, 90.0, 140.0])
    total, polarised = mie.scattered_intensities(m, x, theta)
    assert np.array_equal(total, mie.scattered_intensity(m, x, theta))
    assert np.array_equal(polarised, mie.polarised_scattered_intensity(m, x, theta))
    empty = mie.scattered_intensities(np.array([]), np.array([]), theta)
    assert empty[0].shape == empty[1].shape == (0,)


def _model(phase="mie"):
    mat = Material("g", np.array([0.2, 30.0]), np.full(2, 1.6), np.full(2, 0.02), density=2.0)
    bands = (top_hat_band("b1", 1.0, 0.05), top_hat_band("b2", 1.3, 0.05))
    return DiskColourModel([mat], bands, star_teff=5800, method="exact", a_max=3.0, wavelength_nodes=2,
                           geometry=ScatteringGeometry((70.0, 110.0), phase=phase),
                           size_sampling=SizeSampling(c0=1e-3))


def test_node_values_exact_both_equal_two_single_calls():
    model = _model()
    m = model.effective_index(np.array([[1.0]]), 0.1)
    args = (m, model.node_wavelength, 0.2, 3.5, 3.0)
    total, polarised = model.node_values_exact_both(*args)
    assert np.array_equal(total, model.node_values_exact(*args))
    assert np.array_equal(polarised, model.node_values_exact(*args, quantity="polarised"))


def test_node_values_exact_both_needs_the_mie_phase_function():
    from motes.errors import InputError

    model = _model(phase="hg")
    m = model.effective_index(np.array([[1.0]]), 0.1)
    with pytest.raises(InputError, match="Henyey"):
        model.node_values_exact_both(m, model.node_wavelength, 0.2, 3.5, 3.0)
