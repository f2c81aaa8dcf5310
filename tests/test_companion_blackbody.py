"""Blackbody templates against an independent integration.

Reference: astropy's BlackBody model (astropy.modeling.physical_models,
Planck's law) integrated over each filter curve by Gauss-Legendre quadrature,
<F_lambda> = int B_lambda S lambda^p dlambda / int S lambda^p dlambda with
p = 1 for a photon-counting detector and a per-photon curve, 0 for an
energy-response curve (the convention of motes.photometry.bands, module notes).
Colours are compared, so Vega zero points cancel only through motes' own Vega
average, which the photometry tests check separately.
"""

from __future__ import annotations

import math

import astropy.units as u
import numpy as np
import pytest
from astropy.modeling.physical_models import BlackBody
from scipy.special import roots_legendre

from motes.companion import BlackbodySet
from motes.photometry import get_band, top_hat_band

BANDS = ("2mass_j", "2mass_ks", "wise_w2", "johnson_v")


def _quad_mean_flux(band, teff):
    """pi x band average of astropy's B_lambda by Gauss-Legendre quadrature on every curve segment.

    The curve is linear between its nodes, so each segment's integrand is smooth and
    12-point Gauss-Legendre (scipy.special.roots_legendre) is exact to ~1e-12 there;
    astropy's model is evaluated once on all nodes (a per-point scipy quad over the
    astropy model takes minutes).
    """
    bb = BlackBody(temperature=teff * u.K, scale=1.0 * u.W / (u.m**2 * u.um * u.sr))
    p = (1 if band.counting == "photon" else 0) - (1 if band.response == "energy" else 0)
    wl, tr = band.wavelength, band.throughput
    x, w = roots_legendre(12)
    a, b = wl[:-1, None], wl[1:, None]
    ta, tb = tr[:-1, None], tr[1:, None]
    nodes = 0.5 * (b - a) * (x[None, :] + 1) + a
    weights = 0.5 * (b - a) * w[None, :]
    curve = (ta + (tb - ta) * (nodes - a) / (b - a)) * nodes**p
    planck = bb(nodes * u.um).to_value(u.W / (u.m**2 * u.um * u.sr))
    return math.pi * float(np.sum(weights * curve * planck) / np.sum(weights * curve))


@pytest.mark.parametrize("teff", [700.0, 3500.0])
def test_blackbody_colours_match_astropy_and_quad(teff):
    bands = [get_band(n) for n in BANDS] + [top_hat_band("Lp_test", 3.75, 0.7)]
    grid = BlackbodySet(teffs=[teff, 2 * teff]).grid(bands)
    mags = grid.magnitudes[0]
    ref = np.array([float(b.vega_magnitude_of(_quad_mean_flux(b, teff))) for b in bands])
    # absolute level differs only by the (R/10 pc)^2 dilution: compare colours
    np.testing.assert_allclose(mags - mags[0], ref - ref[0], rtol=0, atol=2e-4)


def test_blackbody_has_no_absolute_scale_without_radius():
    bands = [get_band("2mass_j"), get_band("2mass_ks")]
    assert not BlackbodySet().grid(bands).absolute.any()
    with_radius = BlackbodySet(radius_rjup=1.0).grid(bands)
    assert with_radius.absolute.all()
    # a 2x larger radius is 5 log10(2) = 1.505 mag brighter
    bigger = BlackbodySet(radius_rjup=2.0).grid(bands)
    np.testing.assert_allclose(with_radius.magnitudes - bigger.magnitudes, 5 * math.log10(2), atol=1e-9)
