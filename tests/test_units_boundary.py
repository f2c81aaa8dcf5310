"""Quantities at the public boundary, with cases generated from the declarations.

Every public callable (every name in every module's ``__all__``, and the
public methods and constructors of public classes) that takes an argument
named in :data:`motes.parameters.BOUNDARY_QUANTITIES` must convert it
(:func:`motes.parameters.accepts_quantities`), or be listed in
``NOT_CONVERTED`` with the reason. For every converted argument the tests pass
a Quantity in the declaration's ``test_unit`` (mm for sizes, nm for
wavelengths, kpc for distances, ...) through the callable's own conversion
layer and check the internal number, check that a bare number passes
unchanged, and that a Quantity in seconds is refused with InputError naming
the argument, the unit received and the unit expected. A few end-to-end
checks call the physics with Quantities.
"""

from __future__ import annotations

import importlib
import inspect
import pkgutil

import astropy.units as u
import numpy as np
import pytest

import motes
from motes.errors import InputError
from motes.parameters import BOUNDARY_QUANTITIES, convert_arguments, quantity_arguments

#: Public callables that take a declared name without converting it, and why.
NOT_CONVERTED = {
    "motes.dust.fit.priors.ParameterSpace": "its a_min, a_max, ... are Prior objects, not quantities",
    "motes.dust.grid.spec.GridSpec": "built by parse_grid_description from TOML numbers; axes are tuples",
    "motes.dust.grid.spec.GridPoints": "a batch of grid points computed from keys",
    "motes.dust.model.colours.BandOptics": "result record of DiskColourModel.band_optics",
    "motes.dust.model.mixture.MixtureOptics": "result record of compute_mixture_optics",
    "motes.dust.model.thermal.ThermalResult": "result record of compute_thermal",
    "motes.optics.sizes.BlowoutResult": "result record of find_blowout_size",
    "motes.optics.material.IndexSample": "result record of Material.sample",
    "motes.companion.results.TypeEstimate": "its teff and mass are QuantityEstimate records",
    "motes.companion.results.RankedTemplate": "a row of a classification result",
    "motes.companion.results.DistanceCheck": "result record of classify",
    "motes.companion.templates.TemplateGrid": "built by the template sources from their tables",
    "motes.companion.evolution.MassAtAge": "result record of mass_at_age",
    "motes.photometry.measurements.BandPhotometry": "result record of calibrate",
    "motes.photometry.measurements.CalibratedPhotometry": "result record of calibrate",
}
#: Packages outside the boundary: report/ draws results motes computed (bare arrays in internal units).
NOT_A_BOUNDARY = ("motes.report.",)


def _public_modules():
    for info in pkgutil.walk_packages(motes.__path__, prefix="motes."):
        if info.name.endswith("__main__") or info.name.count(".") == 1:
            continue   # the basement (motes/*.py) declares the units and does the conversion itself
        if info.name.startswith(NOT_A_BOUNDARY):
            continue
        yield importlib.import_module(info.name)


def _callables():
    """(qualified name, callable, signature) of every public function, method and constructor."""
    seen, out = set(), []

    def add(name, obj, func):
        if id(func) in seen:
            return
        seen.add(id(func))
        try:
            sig = inspect.signature(func)
        except (TypeError, ValueError):
            return
        out.append((name, obj, sig))

    for module in _public_modules():
        for attr in getattr(module, "__all__", ()):
            obj = getattr(module, attr)
            if getattr(obj, "__module__", "") is None or not getattr(obj, "__module__", "").startswith("motes."):
                continue
            name = f"{obj.__module__}.{getattr(obj, '__qualname__', attr)}"
            if inspect.isfunction(obj):
                add(name, obj, obj)
            elif inspect.isclass(obj):
                if "__init__" in vars(obj):
                    add(name, obj, obj.__init__)
                for meth_name, meth in vars(obj).items():
                    if meth_name.startswith("_"):
                        continue
                    func = meth.__func__ if isinstance(meth, (staticmethod, classmethod)) else meth
                    if inspect.isfunction(func):
                        add(f"{name}.{meth_name}", func, func)
    return out


CALLABLES = _callables()
CASES = [(name, obj, sig, arg) for name, obj, sig in CALLABLES for arg in quantity_arguments(obj)]


def _declared(sig):
    return sorted(set(sig.parameters) & set(BOUNDARY_QUANTITIES))


def test_the_walk_finds_the_boundary():
    names = {name for name, _, _ in CALLABLES}
    assert "motes.dust.model.colours.DiskColourModel.flux_ratio" in names
    assert "motes.photometry.bands.top_hat_band" in names
    assert len(CASES) > 100


def test_every_declared_argument_is_converted():
    missing = []
    for name, obj, sig in CALLABLES:
        if name in NOT_CONVERTED:
            continue
        converted = quantity_arguments(obj)
        missing += [f"{name}({arg})" for arg in _declared(sig) if arg not in converted]
    assert not missing, ("public callables that take a declared quantity without converting it "
                         f"(decorate with motes.parameters.accepts_quantities): {missing}")


def test_exemptions_are_current():
    found = {name: sig for name, _, sig in CALLABLES}
    stale = [name for name in NOT_CONVERTED if name not in found or not _declared(found[name])]
    assert not stale, f"NOT_CONVERTED names callables that no longer take a declared quantity: {stale}"


def _positional(sig, arg):
    """Placeholders for the parameters before ``arg``, or None when ``arg`` is keyword-only."""
    before = []
    for p in sig.parameters.values():
        if p.name == arg:
            return before if p.kind in (p.POSITIONAL_ONLY, p.POSITIONAL_OR_KEYWORD) else None
        if p.kind not in (p.POSITIONAL_ONLY, p.POSITIONAL_OR_KEYWORD):
            return None
        before.append(object())
    return None


@pytest.mark.parametrize("name,obj,sig,arg", CASES, ids=[f"{c[0]}:{c[3]}" for c in CASES])
def test_a_quantity_in_another_unit_is_converted(name, obj, sig, arg):
    decl = quantity_arguments(obj)[arg]
    for value in (1.5 * decl.test_unit, np.array([1.5, 3.0]) * decl.test_unit):
        expected = value.to_value(decl.unit, equivalencies=decl.equivalencies)
        got = convert_arguments(obj, **{arg: value})[arg]
        assert not isinstance(got, u.Quantity), name
        np.testing.assert_allclose(got, expected, rtol=1e-12, err_msg=f"{name}({arg})")
        before = _positional(sig, arg)
        if before is not None:
            got = convert_arguments(obj, *before, value)[arg]
            np.testing.assert_allclose(got, expected, rtol=1e-12, err_msg=f"{name}({arg}) positional")
    bare = 1.5
    assert convert_arguments(obj, **{arg: bare})[arg] is bare   # a bare number means the internal unit


@pytest.mark.parametrize("name,obj,sig,arg", CASES, ids=[f"{c[0]}:{c[3]}" for c in CASES])
def test_a_quantity_of_the_wrong_type_is_refused(name, obj, sig, arg):
    decl = quantity_arguments(obj)[arg]
    with pytest.raises(InputError) as info:
        convert_arguments(obj, **{arg: 2.0 * u.s})
    message = str(info.value)
    assert arg in message and "'s'" in message and f"'{decl.unit}'" in message, message


def test_signatures_and_docs_are_kept():
    from motes.dust.model.colours import DiskColourModel
    from motes.optics.sizes import PowerLaw

    assert list(inspect.signature(DiskColourModel.flux_ratio).parameters) == [
        "self", "fractions", "porosity", "a_min", "q", "a_max", "f_max"]
    assert "Disk/star flux ratio" in DiskColourModel.flux_ratio.__doc__
    assert list(inspect.signature(PowerLaw).parameters) == ["a_min", "a_max", "q"]
    assert PowerLaw.__init__.__wrapped__.__qualname__ == "PowerLaw.__init__"


# ----------------------------------------------------------- the declarations' units
@pytest.mark.parametrize("name,value,expected", [
    ("a_min", 2 * u.mm, 2000.0),
    ("wavelength", 500 * u.nm, 0.5),
    ("wavelength", 299792458 * u.GHz / 1000, 1.0),     # c / 1 um = 299.792458 THz
    ("width", 100 * u.nm, 0.1),
    ("distance_pc", 1 * u.kpc, 1000.0),
    ("parallax_mas", 1 * u.arcsec, 1000.0),
    ("teff", 0 * u.deg_C, 273.15),
    ("density", 1000 * u.kg / u.m**3, 1.0),
    ("angles_deg", np.pi / 2 * u.rad, 90.0),
    ("flux_jy", 1 * u.mJy, 1e-3),
    ("flux_lambda", 1 * u.erg / u.s / u.cm**2 / u.AA, 10.0),   # 1e-7 W / 1e-4 m^2 / 1e-4 um
    ("luminosity_lsun", 3.828e26 * u.W, 1.0),                  # IAU 2015 nominal L_sun (Resolution B3)
    ("mass_msun", 1 * u.M_sun, 1.0),
])
def test_declared_units_give_the_known_numbers(name, value, expected):
    assert BOUNDARY_QUANTITIES[name].to_internal(value, name) == pytest.approx(expected, rel=1e-9)


def test_a_width_is_not_a_frequency():
    with pytest.raises(InputError, match="width"):
        BOUNDARY_QUANTITIES["width"].to_internal(1 * u.THz, "width")


# ------------------------------------------------------------------- end to end
@pytest.fixture(scope="module")
def tiny_model():
    from motes.dust.model.colours import DiskColourModel
    from motes.photometry.bands import top_hat_band

    return DiskColourModel(["silica_amorphous"], [top_hat_band("b1", 1.0, 0.1), top_hat_band("b2", 2.0, 0.2)],
                           star_teff=5800.0, method="exact", a_max=3.0, wavelength_nodes=2)


def test_flux_ratio_reads_millimetres_as_millimetres(tiny_model):
    # the silent wrong answer of issue 10: Quantities were read as bare numbers in um
    bare = tiny_model.flux_ratio([1.0], 0.1, 0.5, 3.5, 2.0)
    in_mm = tiny_model.flux_ratio([1.0], 0.1, 0.5e-3 * u.mm, 3.5, 2e-3 * u.mm)
    # mm -> um multiplies by 1000 in floating point (1 ulp off): relative 1e-9 covers it
    np.testing.assert_allclose(in_mm, bare, rtol=1e-9)
    as_bare_numbers = tiny_model.flux_ratio([1.0], 0.1, 0.5e-3, 3.5, 2e-3)   # what the old code computed
    assert not np.allclose(as_bare_numbers, bare, rtol=1e-2)
    with pytest.raises(InputError, match="a_min"):
        tiny_model.flux_ratio([1.0], 0.1, 0.5 * u.s, 3.5, 2.0)


def test_constructor_and_monochromatic_path_convert(tiny_model):
    from motes.dust.model.colours import DiskColourModel

    model = DiskColourModel(["silica_amorphous"], list(tiny_model.bands), star_teff=(5800.0 - 273.15) * u.deg_C,
                            method="exact", a_max=3e-3 * u.mm, wavelength_nodes=2)
    assert model.star_teff == pytest.approx(5800.0) and model.a_max == pytest.approx(3.0)
    np.testing.assert_allclose(model.monochromatic_flux_ratio(1500 * u.nm, [1.0], 0.0, 0.5, 3.5),
                               tiny_model.monochromatic_flux_ratio(1.5, [1.0], 0.0, 0.5, 3.5), rtol=1e-9)


def test_photometry_and_optics_convert():
    from motes.conventions import flam_to_fnu
    from motes.optics import mie
    from motes.photometry.bands import top_hat_band
    from motes.photometry.conversions import distance_modulus
    from motes.photometry.spectra import blackbody_flux_lambda
    from motes.dust.model.geometry import ScatteringGeometry

    assert top_hat_band("x", 1250 * u.nm, 100 * u.nm).pivot_wavelength == pytest.approx(
        top_hat_band("x", 1.25, 0.1).pivot_wavelength, rel=1e-12)
    assert distance_modulus(1 * u.kpc) == pytest.approx(distance_modulus(1000.0), rel=1e-12)
    assert blackbody_flux_lambda(500 * u.nm, 5772 * u.K) == pytest.approx(blackbody_flux_lambda(0.5, 5772.0), rel=1e-12)
    assert ScatteringGeometry(angles_deg=[np.pi / 2] * u.rad).angles_deg == pytest.approx((90.0,))
    np.testing.assert_allclose(mie.phase_function(1.5 + 0.01j, 2.0, 90 * u.deg),
                               mie.phase_function(1.5 + 0.01j, 2.0, np.pi / 2), rtol=1e-12)
    assert flam_to_fnu(1 * u.erg / u.s / u.cm**2 / u.AA, 2000 * u.nm) == pytest.approx(flam_to_fnu(10.0, 2.0), rel=1e-12)
    with pytest.raises(InputError, match="centre"):
        top_hat_band("x", 1 * u.s, 0.1)
