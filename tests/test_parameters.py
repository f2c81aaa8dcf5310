"""The forward model's parameters are declared once and read by priors, grid axes, validation and docs."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from motes.errors import FitError, InputError
from motes.parameters import MIXTURE_PARAMETERS, PARAMETERS, PRIOR_PARAMETERS, parameter_table

DOCS = Path(__file__).resolve().parents[1] / "docs"


def test_docs_table_is_the_declarations():
    assert parameter_table() in (DOCS / "fit.md").read_text(), (
        "docs/fit.md must contain the table motes.parameters.parameter_table() prints")


def test_grid_docs_name_every_axis_with_its_unit():
    text = (DOCS / "grid.md").read_text()
    for name in MIXTURE_PARAMETERS:
        unit = PARAMETERS[name].unit_text.replace("um", "µm")
        assert f"`{name}`" + (f" [{unit}]" if unit else "") in text, name


def test_readers_use_the_declared_names():
    from motes.dust.fit.priors import ParameterSpace
    from motes.dust.grid.spec import AXES

    assert AXES == MIXTURE_PARAMETERS == ("porosity", "a_min", "q", "a_max")
    assert PRIOR_PARAMETERS == MIXTURE_PARAMETERS + ("angle", "systematic")
    space = ParameterSpace(materials=("a", "b"))
    assert space.names == ("fraction_a", "fraction_b", "porosity", "a_min", "q")
    assert [row[0] for row in space.describe()] == ["fractions", *PRIOR_PARAMETERS, "scale"]
    assert space.a_max.value == PARAMETERS["a_max"].default


@pytest.mark.parametrize("name", list(PARAMETERS))
def test_interval_and_contains_agree(name):
    p = PARAMETERS[name]
    for end, is_open, bracket in ((p.lo, p.open_lo, "(["), (p.hi, p.open_hi, ")]")):
        if np.isfinite(end):
            assert bool(p.contains(end)) is (not is_open)
        assert bracket[0 if is_open else 1] in p.interval
    assert not p.contains(np.nan) and not p.contains(np.inf)


@pytest.fixture(scope="module")
def model():
    from motes.dust.model.colours import DiskColourModel
    from motes.photometry.bands import top_hat_band

    return DiskColourModel(["silica_amorphous"], [top_hat_band("b", 1.0, 0.1)], star_teff=5800.0,
                           method="exact", a_max=3.0, wavelength_nodes=2)


def test_the_model_refuses_the_declared_bounds(model):
    por, size = PARAMETERS["porosity"], PARAMETERS["a_min"]
    with pytest.raises(InputError, match=r"porosity \(vacuum fraction of the whole grain\) must be in \[0, 1\)"):
        model.flux_ratio([1.0], por.hi, 0.5, 3.5)
    with pytest.raises(InputError, match="a_min and a_max must be finite and > 0 um"):
        model.flux_ratio([1.0], 0.0, size.lo, 3.5)
    assert np.isfinite(model.flux_ratio([1.0], por.lo, 0.5, 3.5)).all()


def test_priors_and_grid_refuse_the_declared_porosity_bound():
    from motes.dust.fit.priors import ParameterSpace, Prior
    from motes.dust.grid.spec import _axis

    hi = PARAMETERS["porosity"].hi
    with pytest.raises(FitError, match=r"porosity must lie in \[0, 1\)"):
        ParameterSpace(materials=("a",), porosity=Prior("fixed", value=hi))
    with pytest.raises(InputError, match=r"vacuum volume fraction, in \[0, 1\)"):
        _axis({"porosity": [0.0, hi]}, "porosity", "g.toml")
    with pytest.raises(InputError, match=r"grain sizes \[um\] must be positive"):
        _axis({"a_min": [PARAMETERS["a_min"].lo, 1.0]}, "a_min", "g.toml")
