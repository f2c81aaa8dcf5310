"""a_min tied to the blow-out size: the fit uses the one blow-out computation of motes.

The blow-out size follows beta(a) = 3 L Q_pr(a) / (16 pi G M c rho a) with Q_pr
from Mie theory averaged over the stellar spectrum (Burns, Lamy & Soter 1979),
:meth:`motes.dust.model.colours.DiskColourModel.blowout`; the fit's prior on
a_min in units of a_blow must read exactly that number, not a Q_pr = 1 shortcut.
"""

from __future__ import annotations

import numpy as np
import pytest

from motes.dust.fit.problem import ProblemHandle
from motes.dust.fit.spec import parse_fit_description
from motes.errors import FitError


def _description(tmp_path, luminosity, teff=8000.0):
    (tmp_path / "d.csv").write_text("band,value,error\n2mass_j,1e-4,1e-5\n2mass_h,1.1e-4,1e-5\n"
                                    "2mass_ks,1.2e-4,1e-5\n")
    return (f'[data]\nphotometry = "d.csv"\n[star]\nteff = {teff}\nluminosity = {luminosity}\nmass = 1.0\n'
            '[[materials]]\nname = "silica"\nsource = "silica_amorphous"\n'
            '[[materials]]\nname = "carbon"\nsource = "carbon_amorphous"\n'
            '[model]\nmethod = "exact"\n'
            '[parameters]\nporosity = { prior = "uniform", lower = 0.0, upper = 0.5 }\n'
            'a_min = { prior = "log-uniform", lower = 1.0, upper = 5.0, relative_to = "blowout" }\n'
            'q = 3.5\na_max = 100.0\n'
            '[models]\nset = "list"\nlist = [["silica", "carbon"]]\n')


def test_fit_blowout_is_the_mie_blowout_of_the_model(tmp_path):
    spec = parse_fit_description(_description(tmp_path, 5.0), base_dir=tmp_path, source="fit.toml")
    problem = ProblemHandle(spec, spec.models[0]).build()
    fractions = np.array([[0.7, 0.3], [0.2, 0.8]])
    porosity = np.array([0.0, 0.4])
    got = problem.space.blowout(fractions, porosity)
    model = problem.colour_model
    for i in range(2):
        expected = model.blowout(fractions[i:i + 1], porosity[i], 5.0, 1.0)
        assert expected.exists
        assert got[i] == pytest.approx(expected.size, rel=1e-12)
    # and it is not the Q_pr = 1 value: the Mie average differs by more than rounding here
    from motes.optics.sizes import blowout_size

    rho = model.density(fractions[:1], porosity[:1])[0]
    assert abs(got[0] / blowout_size(5.0, 1.0, rho) - 1) > 0.01


def test_fit_refuses_a_star_that_blows_nothing_out(tmp_path):
    # a faint star: beta < 1/2 at every size for these grains, so a_min cannot be tied to a_blow
    spec = parse_fit_description(_description(tmp_path, 0.01, 3500.0), base_dir=tmp_path, source="fit.toml")
    with pytest.raises(FitError, match="never blown out"):
        ProblemHandle(spec, spec.models[0]).build()


def test_transparent_grains_around_a_sunlike_star_are_not_blown_out(tmp_path):
    # Nearly transparent silica scatters rather than absorbs: its spectrum-averaged Q_pr stays
    # low enough that beta < 1/2 at every size around a solar-type star, although the Q_pr = 1
    # shortcut gives a blow-out radius near 0.5 um. The fit says so instead of using that size.
    from motes.optics.sizes import blowout_size

    spec = parse_fit_description(_description(tmp_path, 1.0, 5800.0), base_dir=tmp_path, source="fit.toml")
    assert 0.3 < blowout_size(1.0, 1.0, 2.2) < 1.0
    with pytest.raises(FitError, match=r"grains of 'silica' are never blown out"):
        ProblemHandle(spec, spec.models[0]).build()
