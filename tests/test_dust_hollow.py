"""Hollow-sphere grains (Min, Hovenier & de Koter 2005) in the disk model: description, exact and fast paths.

The optics of the coated and hollow spheres themselves (against scattnlay, the homogeneous and
solid-core limits, x >= 1000 with an absorbing mantle, the removal of resonance structure) are
checked in tests/test_optics_coated.py.
"""

from __future__ import annotations

import numpy as np
import pytest

from motes.dust.model.colours import DiskColourModel, ScatteringGeometry
from motes.dust.model.description import MODEL_KEYS, parse_model_description
from motes.dust.model.sampling import SizeSampling
from motes.dust.model.tablebuild import channel_key
from motes.dust.model.tables import LookupTable, ModelTable, TableSpec
from motes.errors import InputError
from motes.optics import hollow, mie
from motes.optics.constants import Material
from motes.photometry.bands import top_hat_band


def _material(name, m):
    return Material(name, np.array([0.2, 30.0]), np.full(2, m.real), np.full(2, m.imag), density=2.0)


BANDS = (top_hat_band("b1", 1.0, 0.05), top_hat_band("b2", 1.3, 0.05))
#: a small table (m ~ 2 + 0.5i, x up to ~4.3); coarser than the default one, as in test_dust_polarised.py
SMALL = TableSpec(n_min=1.8, dln_n=0.02, n_count=14, k_shift=1e-6, dln_k=0.4, k_count=40,
                  x_min=0.05, dln_x=0.05, x_count=90, sampling=SizeSampling(c0=1e-3, c_max=0.05))


def _doc(**model):
    return {"star": {"teff": 5800.0}, "materials": [{"name": "silica_amorphous"}],
            "model": {"bands": ["2mass_j"], **model}}


# ------------------------------------------------------------------ description
def test_description_default_is_spheres_and_hollow_spheres_need_f_max():
    d = parse_model_description(_doc())
    assert (d.grains, d.f_max, d.grain_summary) == ("spheres", None, "spheres")
    assert d.build_model(method="exact").grain_summary == "spheres"
    h = parse_model_description(_doc(grains="hollow spheres", f_max=0.8))
    assert (h.grains, h.f_max) == ("hollow spheres", 0.8)
    model = h.build_model(method="exact")
    assert model.grain_summary == "hollow spheres (f_max = 0.8)"
    assert "grains: hollow spheres (f_max = 0.8)" in model.describe()
    assert any("Min, Hovenier & de Koter 2005" in n for n in model.notes)
    assert {"grains", "f_max"} <= MODEL_KEYS["model"]


@pytest.mark.parametrize("model,match", [
    ({"grains": "hollow spheres", "f_max": 1.0}, r"f_max .* must be in \[0, 1\), got 1"),
    ({"grains": "hollow spheres", "f_max": -0.1}, r"f_max .* must be in \[0, 1\), got -0.1"),
    ({"grains": "hollow spheres"}, "needs f_max"),
    ({"grains": "hollow spheres", "f_max": [0.5, 0.8]}, "one number per run"),
    ({"f_max": 0.5}, "used by grains = 'hollow spheres' only"),
    ({"grains": "hollow"}, "grains must be one of 'spheres', 'hollow spheres'"),
])
def test_description_refuses_bad_grain_models(model, match):
    with pytest.raises(InputError, match=match) as info:
        parse_model_description(_doc(**model), source="d.toml")
    assert info.value.path is not None and "[model]" in str(info.value)


@pytest.mark.parametrize("f_max", [1.0, -0.5, np.nan, None])
def test_model_refuses_f_max_outside_the_unit_interval(f_max):
    with pytest.raises(InputError, match="f_max"):
        DiskColourModel([_material("g", 1.5 + 0.01j)], BANDS, star_teff=5800, method="exact",
                        grains="hollow spheres", f_max=f_max)
    with pytest.raises(InputError, match="hollow spheres' only"):
        DiskColourModel([_material("g", 1.5 + 0.01j)], BANDS, star_teff=5800, f_max=0.5)


def test_optics_with_bad_f_max_writes_nothing(tmp_path):
    from motes.cli import main

    (tmp_path / "mix.toml").write_text(
        '[star]\nteff = 5800.0\n[[materials]]\nname = "silica_amorphous"\n'
        '[model]\nbands = ["2mass_j", "2mass_h"]\ngrains = "hollow spheres"\nf_max = 1.2\n'
        '[mixture]\nfractions = { silica_amorphous = 1.0 }\nporosity = 0.0\na_min = 0.5\nq = 3.5\n')
    out = tmp_path / "out"
    code = main(["optics", str(tmp_path / "mix.toml"), "--output", str(out)])
    assert code != 0
    assert not out.exists() or not any(out.iterdir())


# ------------------------------------------------------------------ exact path
def test_exact_path_uses_the_hollow_sphere_average():
    # node values are the size integral of hollow.hollow_intensities over the material size
    # parameter; f_max = 0 reproduces the solid spheres (the coated code's homogeneous limit)
    mat = _material("g", 1.6 + 0.02j)
    kw = dict(star_teff=5800, method="exact", geometry=ScatteringGeometry((70.0, 110.0)), a_max=1.5,
              wavelength_nodes=2, size_sampling=SizeSampling(c0=1e-3), intensities=("total", "polarised"))
    solid = DiskColourModel([mat], BANDS, **kw)
    zero = DiskColourModel([mat], BANDS, grains="hollow spheres", f_max=0.0, **kw)
    hol = DiskColourModel([mat], BANDS, grains="hollow spheres", f_max=0.8, **kw)
    args = ([1.0], 0.1, 0.2, 3.5)
    assert np.allclose(zero.flux_ratio(*args), solid.flux_ratio(*args), rtol=1e-8)
    r_h, r_s = hol.flux_ratio(*args), solid.flux_ratio(*args)
    assert np.all(np.abs(r_h / r_s - 1) > 0.02)          # a different grain model gives other colours
    o = hol.band_optics(*args, polarised=True)
    assert np.allclose(o.flux_ratio[0], r_h[0, 0], rtol=1e-12)
    assert o.polarised_flux_ratio[1] == pytest.approx(r_h[0, 1], rel=1e-12)
    # one node by hand: the size integral of the hollow-sphere intensity
    lam = np.array([1.0])
    m = hol.effective_index([1.0], 0.1, lam)
    t = np.geomspace(2 * np.pi * 0.2, 2 * np.pi * 1.5, 4001)
    s, _ = hollow.hollow_intensities(m[0, 0], t, hol.geometry.angles_rad, 0.8)
    from motes.optics.sizes import power_law_cross_section

    by_hand = ((1 / (2 * np.pi)) ** (3 - 3.5) * np.trapezoid(0.5 * t ** -3.5 * s, t)
               / (np.pi * power_law_cross_section(0.2, 1.5, 3.5)))
    got = hol.node_values_exact(m, lam, 0.2, 3.5, 1.5)[0, 0]
    assert got == pytest.approx(float(by_hand), rel=2e-3)


def test_hollow_spheres_with_henyey_greenstein_and_blowout():
    # HG uses the hollow-sphere Q_sca and g; radiation pressure the hollow-sphere Q_pr per material
    # area (the core adds cross-section at fixed mass, so small absorbing grains feel more pressure)
    mat = _material("g", 1.7 + 0.3j)
    kw = dict(star_teff=5800, method="exact", geometry=ScatteringGeometry((90.0,), "hg"), a_max=1.0,
              wavelength_nodes=1, size_sampling=SizeSampling(c0=1e-3))
    hol = DiskColourModel([mat], BANDS[:1], grains="hollow spheres", f_max=0.8, **kw)
    e = hol.grain_efficiencies(np.array([1.7 + 0.3j]), np.array([3.0]))
    ref = hollow.hollow_efficiencies(1.7 + 0.3j, 3.0, 0.8)
    assert float(e.q_sca[0]) == float(ref.q_sca)
    assert np.isfinite(hol.flux_ratio([1.0], 0.0, 0.1, 3.5)).all()
    solid = DiskColourModel([mat], BANDS[:1], **kw)
    q_h, _ = hol.radiation_pressure_efficiency([1.0], 0.0, [0.5])
    q_s, _ = solid.radiation_pressure_efficiency([1.0], 0.0, [0.5])
    assert q_h[0] > q_s[0]
    assert float(mie.efficiencies(1.7 + 0.3j, 3.0).q_sca) == float(
        solid.grain_efficiencies(np.array([1.7 + 0.3j]), np.array([3.0])).q_sca[0])


# ------------------------------------------------------------------ fast path
def test_hollow_tables_have_their_own_cache_folders():
    geo = ScatteringGeometry()
    assert channel_key(geo) == geo.key()                  # solid spheres keep their folder
    keys = {channel_key(geo, q, f) for q in ("total", "polarised") for f in (None, 0.5, 0.8)}
    assert len(keys) == 6
    assert LookupTable(geo, SMALL, progress=False, f_max=0.8).folder != LookupTable(geo, SMALL, progress=False).folder


def test_small_hollow_table_matches_exact(tmp_path):
    # the hollow-sphere table (total and polarised) against the exact path on the small table.
    # Measured: total within 2.9e-4, polarised within 9.0e-4 (required: 5e-3).
    geometry = ScatteringGeometry((70.0, 110.0))
    model = DiskColourModel([_material("g", 2.0 + 0.5j)], BANDS[:1], star_teff=5800, method="exact",
                            geometry=geometry, size_sampling=SMALL.sampling, grains="hollow spheres", f_max=0.8)
    table = ModelTable(model, LookupTable(geometry, SMALL, folder=tmp_path / "t", progress=False, f_max=0.8),
                       LookupTable(geometry, SMALL, folder=tmp_path / "p", progress=False, quantity="polarised",
                                   f_max=0.8))
    lam = np.array([1.0, 1.3])
    m = np.array([[2.03 + 0.47j, 1.95 + 0.55j]])
    a_min, a_max, q = np.array([0.01]), np.array([0.6]), np.array([3.43])
    for quantity in ("total", "polarised"):
        fast = table.node_values(m, lam, a_min, q, a_max, quantity=quantity)
        exact = model.node_values_exact(m, lam, a_min, q, a_max, quantity=quantity)
        assert np.allclose(fast, exact, rtol=5e-3), (quantity, fast / exact - 1)


# ------------------------------------------------------------------ fits and grids
_MATERIALS_TOML = '[star]\nteff = 5800.0\n[[materials]]\nname = "silica_amorphous"\n'


def _fit_text(model, parameters):
    return (_MATERIALS_TOML + f'[model]\n{model}[data]\nphotometry = "d.csv"\n'
            f'[parameters]\nporosity = 0.1\na_min = 0.2\nq = 3.5\n{parameters}')


def test_fit_takes_a_prior_on_f_max(tmp_path):
    # a fitted f_max (tests/test_dust_hollow_fmax.py has the model side): a free prior joins the
    # parameter space, a fixed value is the one-f_max model; bad combinations are refused
    from motes.dust.fit.spec import parse_fit_description

    (tmp_path / "d.csv").write_text("band,value,error\n2mass_j,1e-5,1e-6\n")
    hollow = 'grains = "hollow spheres"\n'
    spec = parse_fit_description(_fit_text(hollow, 'f_max = { prior = "uniform", lower = 0.2, upper = 0.8 }\n'),
                                 base_dir=tmp_path, source="fit.toml")
    assert spec.description.f_max is None and spec.description.f_max_tables == "nodes"
    assert spec.description.grain_summary == "hollow spheres (f_max fitted)"
    space = spec.parameter_space(spec.models[0])
    assert space.names == ("f_max",) and ("f_max", "uniform [0.2, 0.8]") in space.describe()
    assert spec.description.subset(["silica_amorphous"]).build_model(bands=["2mass_j"]).f_max_tables == "nodes"
    fixed = parse_fit_description(_fit_text(hollow, "f_max = 0.6\n"), base_dir=tmp_path, source="fit.toml")
    assert (fixed.description.f_max, fixed.description.f_max_tables) == (0.6, None)
    assert "f_max" not in fixed.parameters
    for model, parameters, match in [
            (hollow + "f_max = 0.8\n", "f_max = 0.5\n", "f_max is given both in \\[model\\] and in \\[parameters\\]"),
            ("", "f_max = 0.5\n", "used by hollow-sphere grains only"),
            (hollow, 'f_max = { prior = "uniform", lower = 0.2, upper = 0.95 }\n', r"f_max in \[0.1, 0.9\] only"),
            (hollow, 'f_max = { prior = "uniform", lower = 0.0, upper = 0.5 }\n', r"f_max in \[0.1, 0.9\] only"),
            (hollow, 'f_max = { prior = "uniform", lower = -0.1, upper = 0.5 }\n', r"must lie in \[0, 1\)")]:
        with pytest.raises(InputError, match=match) as info:
            parse_fit_description(_fit_text(model, parameters), base_dir=tmp_path, source="fit.toml")
        assert "f_max" in str(info.value) and "fit.toml" in str(info.value)


def test_grid_takes_an_f_max_axis(tmp_path):
    from motes.dust.grid.spec import parse_grid_description

    (tmp_path / "d.csv").write_text("band,value,error\n2mass_j,1e-5,1e-6\n")
    head = _MATERIALS_TOML + '[data]\nphotometry = "d.csv"\n[model]\ngrains = "hollow spheres"\n'
    axes = '[grid]\nfraction_step = 1.0\nporosity = [0.0, 0.2]\na_min = [0.1]\nf_max = [0.5, 0.8]\n'
    spec = parse_grid_description(head + axes, base_dir=tmp_path, source="grid.toml")
    assert spec.axis_names[-1] == "f_max" and spec.n_points == 4
    pts = spec.points(np.arange(4))
    assert pts.f_max.tolist() == [0.5, 0.8, 0.5, 0.8] and pts.porosity.tolist() == [0.0, 0.0, 0.2, 0.2]
    assert spec.nearest_key([1.0], 0.2, 0.1, f_max=0.75) == 3
    assert spec.description.f_max_tables == "values"
    assert "2 porosity x 1 a_min x 1 q x 1 a_max x 2 f_max" in spec.describe_count()
    for text, match in [(head + "f_max = 0.8\n" + axes, "given both"),
                        (head + axes.replace("[0.5, 0.8]", "[0.5, 1.0]"), r"f_max .* must be in \[0, 1\)"),
                        (_MATERIALS_TOML + '[data]\nphotometry = "d.csv"\n' + axes, "hollow-sphere grains only")]:
        with pytest.raises(InputError, match=match) as info:
            parse_grid_description(text, base_dir=tmp_path, source="grid.toml")
        assert "f_max" in str(info.value)


def test_hollow_table_x_range_follows_a_max():
    # the default hollow-sphere table stops above 2 pi a_max / lambda_min (in steps of 20 nodes, a
    # factor 1.65 in x, plus 4 nodes: at most 1.02 x 1.82 above);
    # the sphere table keeps the default range
    from motes.dust.model.tables import _default_spec

    kw = dict(star_teff=5800, method="fast", wavelength_nodes=1)
    hol = DiskColourModel([_material("g", 2.0 + 0.5j)], BANDS, grains="hollow spheres", f_max=0.8, a_max=2.0, **kw)
    spec = _default_spec(hol)
    x_need = 2 * np.pi * 2.0 / hol.node_wavelength.min()
    assert x_need < spec.x_top < 1.9 * x_need and spec.x_count % 20 == 0
    assert _default_spec(DiskColourModel([_material("g", 2.0 + 0.5j)], BANDS, a_max=2.0, **kw)) == TableSpec()
    big = DiskColourModel([_material("g", 2.0 + 0.5j)], BANDS, grains="hollow spheres", f_max=0.8, a_max=1e4, **kw)
    assert _default_spec(big) == TableSpec()
