"""Polarised-intensity colours: the model (exact and fast), the data tables, the shared flux scale,
fits and grids.

External check: the Rayleigh limit of the degree of polarisation, (1 - cos^2 theta) / (1 + cos^2
theta) for x << 1 (Bohren & Huffman 1983, ch. 5), through the whole size- and band-integrated
disk model. The amplitude products |S1|^2, |S2|^2 and S1 S2* of the Mie solver are compared with
scattnlay in tests/test_optics_mie.py and tests/test_optics_coated.py.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.optimize import minimize_scalar

from motes.dust.likelihood import chi_square, chi_square_with_best_scale, ln_marginal_likelihood, ScalePrior
from motes.dust.model.colours import DiskColourModel, ScatteringGeometry
from motes.dust.model.sampling import SizeSampling
from motes.dust.model.tables import LookupTable, ModelTable, TableSpec
from motes.dust.observations import DiskPhotometry, read_disk_photometry
from motes.errors import FitError, InputError
from motes.optics.constants import Material
from motes.photometry.bands import top_hat_band


def _material(name, m):
    return Material(name, np.array([0.2, 30.0]), np.full(2, m.real), np.full(2, m.imag), density=2.0)


BANDS = (top_hat_band("b1", 1.0, 0.05), top_hat_band("b2", 1.3, 0.05))
#: the small table of tests/test_dust_model_fast.py (m ~ 2 + 0.5i, x up to ~18)
SMALL = TableSpec(n_min=1.8, dln_n=0.02, n_count=14, k_shift=1e-6, dln_k=0.4, k_count=40,
                  x_min=0.05, dln_x=0.05, x_count=120, sampling=SizeSampling(c0=2e-4, c_max=0.05))


# ------------------------------------------------------------------ the model
@pytest.mark.parametrize("angle", [60.0, 90.0, 130.0])
def test_rayleigh_limit_of_the_disk_model(angle):
    # Grains of 1-5 nm at ~1 um (x < 0.04): the size- and band-integrated degree of polarisation
    # is the Rayleigh value (1 - cos^2)/(1 + cos^2) (Bohren & Huffman 1983, ch. 5), corrections O(x^2).
    model = DiskColourModel([_material("g", 1.5 + 0.01j)], BANDS, star_teff=5800, method="exact",
                            geometry=ScatteringGeometry((angle,)), a_max=0.005, wavelength_nodes=2)
    o = model.band_optics([1.0], 0.0, 0.001, 3.5, polarised=True)
    mu = math.cos(math.radians(angle))
    assert np.allclose(o.degree_of_polarisation, (1 - mu**2) / (1 + mu**2), atol=2e-3)


def test_total_and_polarised_columns_of_one_model():
    # a band may appear twice (total and polarised); the total columns are exactly those of a
    # total-only model, the polarised ones the exact polarised integral
    mat = _material("g", 1.6 + 0.02j)
    geo = ScatteringGeometry((70.0, 110.0))
    kw = dict(star_teff=5800, method="exact", geometry=geo, a_max=3.0, wavelength_nodes=2,
              size_sampling=SizeSampling(c0=1e-3))
    both = DiskColourModel([mat], BANDS + BANDS[:1], intensities=("total", "polarised", "polarised"), **kw)
    total = DiskColourModel([mat], BANDS, **kw)
    assert both.has_polarised and both.has_total
    a = both.flux_ratio([1.0], 0.1, 0.2, 3.5)
    t = total.flux_ratio([1.0], 0.1, 0.2, 3.5)
    assert a[0, 0] == t[0, 0]                       # bit-identical total column
    o = total.band_optics([1.0], 0.1, 0.2, 3.5, polarised=True)
    assert a[0, 2] == pytest.approx(o.polarised_flux_ratio[0], rel=1e-12)
    assert a[0, 1] == pytest.approx(o.polarised_flux_ratio[1], rel=1e-12)
    assert np.all(np.abs(o.degree_of_polarisation) <= 1)


def test_henyey_greenstein_refuses_polarised_columns():
    with pytest.raises(InputError, match="carries no polarisation"):
        DiskColourModel([_material("g", 1.5 + 0.01j)], BANDS, star_teff=5800, method="exact",
                        geometry=ScatteringGeometry((90.0,), "hg"), intensities=("total", "polarised"))
    with pytest.raises(InputError, match="listed twice"):
        DiskColourModel([_material("g", 1.5 + 0.01j)], BANDS + BANDS[:1], star_teff=5800, method="exact",
                        intensities=("total", "polarised", "total"))
    with pytest.raises(InputError, match="'total' or 'polarised'"):
        DiskColourModel([_material("g", 1.5 + 0.01j)], BANDS, star_teff=5800, intensities=("total", "linear"))


@pytest.mark.parametrize("k", [0.5, 0.01])
def test_small_polarised_table_matches_exact(tmp_path, k):
    # the fast path's polarised table against the exact path, on the small table of the total
    # path's own test (coarser than the default one: steps 0.02 in ln n and 0.05 in ln x).
    # Measured: total within 7e-4, polarised within 8e-3 (k = 0.01, where R_pol is negative and
    # partly cancels between sizes); the goal is 1% for polarised ratios not near zero.
    geometry = ScatteringGeometry((70.0, 110.0))
    model = DiskColourModel([_material("g", 2.0 + k * 1j)], BANDS[:1], star_teff=5800, method="exact",
                            geometry=geometry, size_sampling=SMALL.sampling)
    table = ModelTable(model, LookupTable(geometry, SMALL, folder=tmp_path / "t", progress=False),
                       LookupTable(geometry, SMALL, folder=tmp_path / "p", progress=False, quantity="polarised"))
    lam = np.array([1.0, 1.3])
    m = np.array([[2.03 + 0.94j * k, 1.95 + 1.1j * k], [2.1 + 1.2j * k, 2.0 + 1j * k]])
    a_min, a_max, q = np.array([0.001, 0.3]), np.array([2.0, 2.5]), np.array([3.43, 3.77])
    fast = table.node_values(m, lam, a_min, q, a_max, quantity="polarised")
    exact = model.node_values_exact(m, lam, a_min, q, a_max, quantity="polarised")
    assert np.allclose(fast, exact, rtol=1e-2)
    if k < 0.1:
        assert (exact < 0).any()                    # negative polarised intensity is a result


def test_polarised_table_is_its_own_cache_folder(tmp_path):
    geo = ScatteringGeometry()
    total = LookupTable(geo, SMALL, progress=False)
    pol = LookupTable(geo, SMALL, progress=False, quantity="polarised")
    assert total.folder != pol.folder
    with pytest.raises(InputError, match="no polarisation"):
        LookupTable(ScatteringGeometry((90.0,), "hg"), SMALL, progress=False, quantity="polarised")


def test_fast_model_builds_polarised_tiles_only_when_needed(tmp_path, monkeypatch):
    from motes.dust.model import tables

    monkeypatch.setenv("MOTES_CACHE_DIR", str(tmp_path))
    monkeypatch.setattr(tables, "_TABLES", {})
    geo = ScatteringGeometry((70.0, 110.0))
    kw = dict(star_teff=5800, method="fast", geometry=geo, a_max=2.0, wavelength_nodes=1)
    mat = _material("g", 2.0 + 0.5j)
    total = DiskColourModel([mat], BANDS[:1], **kw)
    total.table_spec = SMALL
    total.flux_ratio([1.0], 0.0, 0.3, 3.5)
    assert total._fast_table().polarised is None
    assert len(tables._TABLES) == 1                 # a total-only run makes no polarised table
    pol = DiskColourModel([mat], BANDS[:1] * 2, intensities=("total", "polarised"), **kw)
    pol.table_spec = SMALL
    fast = pol.flux_ratio([1.0], 0.0, 0.3, 3.5)
    exact = DiskColourModel([mat], BANDS[:1] * 2, intensities=("total", "polarised"),
                            **{**kw, "method": "exact"}, size_sampling=SMALL.sampling).flux_ratio([1.0], 0.0, 0.3, 3.5)
    assert np.allclose(fast, exact, rtol=1e-2)
    assert fast[0, 0] == total.flux_ratio([1.0], 0.0, 0.3, 3.5)[0, 0]


# ------------------------------------------------------------------ data tables
def test_read_total_and_polarised_rows(tmp_path):
    path = tmp_path / "disk.csv"
    path.write_text("band,value,error,intensity\n"
                    "2mass_j,1.0e-4,3e-6,total\n"
                    "2mass_h,1.2e-4,3e-6,\n"
                    "2mass_j,2.0e-5,2e-6,polarised\n"
                    "2mass_h,-3.0e-6,2e-6,polarized\n")
    obs = read_disk_photometry(path)
    assert obs.intensity == ("total", "total", "polarised", "polarised")
    assert obs.band_names == ("2mass_j", "2mass_h", "2mass_j", "2mass_h")
    assert obs.row_keys == ("2mass_j", "2mass_h", "2mass_j_polarised", "2mass_h_polarised")
    assert obs.value[3] == -3.0e-6                  # a negative polarised intensity is data
    assert list(obs.to_table()["intensity"]) == list(obs.intensity)


def test_table_meta_sets_the_default_intensity(tmp_path):
    from astropy.table import Table

    t = Table({"band": ["2mass_j", "2mass_h"], "value": [1e-5, 2e-5], "error": [1e-6, 1e-6]})
    t.meta["intensity"] = "polarised"
    path = tmp_path / "disk.ecsv"
    t.write(path, format="ascii.ecsv")
    assert read_disk_photometry(path).intensity == ("polarised", "polarised")


def test_mixed_kinds_without_a_column_are_refused(tmp_path):
    path = tmp_path / "disk.csv"
    path.write_text("band,value,error\n2mass_j,1.0e-4,3e-6\n2mass_j,2.0e-5,2e-6\n")
    with pytest.raises(InputError, match="add a column 'intensity'") as err:
        read_disk_photometry(path)
    assert "disk.csv" in str(err.value) and "row 2" in str(err.value)
    path.write_text("band,value,error,intensity\n2mass_j,1.0e-4,3e-6,total\n2mass_j,2.0e-5,2e-6,linear\n")
    with pytest.raises(InputError, match="'total' or 'polarised'"):
        read_disk_photometry(path)
    path.write_text("band,value,error,intensity\n2mass_j,1.0e-4,3e-6,polarised\n2mass_j,2.0e-5,2e-6,polarised\n")
    with pytest.raises(InputError, match="polarised intensity already given in row 1"):
        read_disk_photometry(path)


# ------------------------------------------------------------------ one flux scale
def _obs(value, error, intensity, limits=None):
    bands = (BANDS[0], BANDS[1], BANDS[0], BANDS[1])[: len(value)]
    limits = np.zeros(len(value), bool) if limits is None else np.asarray(limits, bool)
    return DiskPhotometry(bands, value, error, limits, np.where(limits, 3.0, np.nan), intensity=intensity)


def test_one_scale_for_total_and_polarised_rows():
    # weighted least squares over the joint vector: s = sum(m v / s^2) / sum(m^2 / s^2), whatever
    # the sign of the polarised model values
    model = np.array([[2.0, 3.0, 0.4, -0.1]])
    obs = _obs([4.1, 5.9, 0.83, -0.18], [0.2, 0.3, 0.05, 0.05], ("total", "total", "polarised", "polarised"))
    s, chi2, dof = chi_square_with_best_scale(model, obs)
    w = 1 / obs.error**2
    assert s[0] == pytest.approx(np.sum(w * model[0] * obs.value) / np.sum(w * model[0] ** 2), rel=1e-12)
    assert chi2[0] == pytest.approx(chi_square(s[0] * model, obs)[0], rel=1e-10)
    assert dof == 3
    ln_l, s_best = ln_marginal_likelihood(model, obs, ScalePrior(1e-3, 1e3))
    assert np.isfinite(ln_l).all() and s_best[0] == pytest.approx(s[0], rel=1e-12)


def test_upper_limit_on_a_negative_polarised_model_value():
    # a limit on a negative model value pulls the scale up, above the detections' optimum;
    # the exact minimum of chi2(s) (brute force) is found
    model = np.array([2.0, 3.0, -0.4])
    obs = _obs([4.0, 6.0, 1e-3], [0.5, 0.6, 1e-3 / 3], ("total", "total", "polarised"),
               limits=[False, False, True])
    s, chi2, _ = chi_square_with_best_scale(model, obs)
    ref = minimize_scalar(lambda x: float(chi_square(x * model[None, :], obs)[0]), bounds=(0, 10),
                          method="bounded", options={"xatol": 1e-10})
    assert s == pytest.approx(ref.x, rel=1e-6)
    assert chi2 == pytest.approx(ref.fun, rel=1e-8)


# ------------------------------------------------------------------ fits and grids
FIT_TEXT = """
[data]
photometry = "disk.csv"

[star]
teff = 5800.0

[[materials]]
name = "silica"
source = "silica_amorphous"

[[materials]]
name = "carbon"
source = "carbon_amorphous"

[geometry]
angles_deg = [70.0, 110.0]
phase = "{phase}"

[model]
method = "exact"
wavelength_nodes = 1
a_max = 3.0

"""
FIT_TAIL = """
[parameters]
a_min = { prior = "log-uniform", lower = 0.1, upper = 1.0 }
a_max = 3.0

[models]
set = "list"
list = [["silica", "carbon"]]
"""


def _write_fit(tmp_path, phase="mie"):
    (tmp_path / "disk.csv").write_text("band,value,error,intensity\n"
                                       "2mass_j,1.0e-4,1e-5,total\n"
                                       "2mass_h,1.1e-4,1e-5,total\n"
                                       "2mass_j,1.0e-5,1e-5,polarised\n"
                                       "2mass_h,-1.0e-6,1e-5,polarised\n")
    path = tmp_path / "fit.toml"
    path.write_text(FIT_TEXT.format(phase=phase) + FIT_TAIL)
    return path


def _problem(path):
    from motes.dust.fit.problem import ProblemHandle
    from motes.dust.fit.spec import read_fit_description

    spec = read_fit_description(path)
    return ProblemHandle(spec, spec.models[0]).build()


def test_fit_problem_with_polarised_rows(tmp_path):
    problem = _problem(_write_fit(tmp_path))
    assert problem.colour_model.intensities == ("total", "total", "polarised", "polarised")
    u = np.random.default_rng(3).uniform(size=(4, problem.space.ndim))
    theta = np.array([problem.space.transform(x) for x in u])
    flux = problem.model_ratios(theta)
    assert flux.shape == (4, 4)
    ln_l = problem.ln_likelihood(theta)
    assert np.all(np.isfinite(ln_l)) and np.all(ln_l > -1e299)    # negative polarised values accepted


def test_fit_refuses_polarised_rows_with_henyey_greenstein(tmp_path):
    with pytest.raises(InputError, match="Henyey-Greenstein, which carries no polarisation"):
        _problem(_write_fit(tmp_path, phase="hg"))


def test_fit_refuses_a_total_only_factory(tmp_path):
    from motes.dust.fit.problem import ProblemHandle
    from motes.dust.fit.spec import read_fit_description

    spec = read_fit_description(_write_fit(tmp_path))

    def total_only(spec, materials, bands):
        return spec.description.subset(materials).build_model(bands=bands)

    with pytest.raises(FitError, match="takes no intensities"):
        ProblemHandle(spec, spec.models[0], model_factory=total_only).build()


def test_grid_evaluator_with_polarised_rows(tmp_path):
    from motes.dust.grid.spec import parse_grid_description
    from motes.dust.grid.workers import GridEvaluator

    _write_fit(tmp_path)
    text = FIT_TEXT.format(phase="mie") + "[grid]\nfraction_step = 0.5\nporosity = [0.0]\na_min = [0.5]\n"
    spec = parse_grid_description(text, base_dir=tmp_path)
    ev = GridEvaluator(spec)
    cols = ev.evaluate(np.arange(spec.n_points))
    assert "model_2mass_j_polarised" in cols and "model_2mass_j" in cols
    assert np.all(np.isfinite(cols["chi2"])) and np.all(cols["scale"] > 0)


# ------------------------------------------------------------------ motes optics
MIXTURE = """
[star]
teff = 5800.0

[[materials]]
name = "silica"
source = "silica_amorphous"

[geometry]
angles_deg = [90.0]
phase = "{phase}"

[model]
bands = ["2mass_j", "2mass_h"]
wavelength_nodes = 2

[mixture]
fractions = {{ silica = 1.0 }}
porosity = 0.2
a_min = 0.2
q = 3.5
a_max = 2.0
"""


@pytest.mark.parametrize("phase", ["mie", "hg"])
def test_optics_prints_and_draws_polarised_intensity(tmp_path, phase):
    from motes.dust.model.mixture import compute_mixture_optics, read_mixture_file
    from motes.report import format_mixture_optics, write_mixture_outputs

    path = tmp_path / "mix.toml"
    path.write_text(MIXTURE.format(phase=phase))
    result = compute_mixture_optics(*read_mixture_file(path), spectrum_points=6)
    text = format_mixture_optics(result)
    written = write_mixture_outputs(result, tmp_path / "out")
    table = result.to_table()
    if phase == "mie":
        assert "R_pol [1/sr]" in text and "degree_of_polarisation" in table.colnames
        p = result.optics.degree_of_polarisation
        assert np.allclose(table["degree_of_polarisation"], p) and np.all(np.abs(p) <= 1)
        assert any(w.name.endswith("_polarisation.png") for w in written)
    else:
        assert "R_pol" not in text and "degree_of_polarisation" not in table.colnames
        assert "Henyey-Greenstein phase function carries no polarisation" in text
        assert not any(w.name.endswith("_polarisation.png") for w in written)
