"""What the command line prints: help without format escapes, errors in plain words, units in tables.

Issue 14 ("One command line"): `classify --help` printed a literal "68%%"; fit
errors printed Python tuples, absolute paths and the file name twice; a
sampler setting of the wrong type ended in a traceback; the posterior summary
(parameters.ecsv) carried no unit for a_min.
"""

from __future__ import annotations

import argparse

import numpy as np
import pytest

from motes.cli import build_parser, main
from motes.dust.fit.evidence import summarise_posterior
from motes.dust.fit.problem import read_fit_photometry
from motes.dust.fit.spec import read_fit_description
from motes.errors import InputError

# an invented toy fit, small enough to parse in milliseconds (nothing is computed)
FIT = """\
[data]
photometry = "disk.csv"

[star]
teff = 5000.0

[[materials]]
name = "silica"
source = "silica_amorphous"

[parameters]
porosity = { prior = "uniform", lower = 0.0, upper = 0.8 }
a_min = { prior = "log-uniform", lower = 0.5, upper = 10.0 }
"""
DATA = "band,value,error\n2mass_j,1.0e-4,1e-5\n2mass_h,1.1e-4,1e-5\n"


def _helps(parser: argparse.ArgumentParser, prefix="motes"):
    yield prefix, parser.format_help()
    for action in parser._actions:
        if isinstance(action, argparse._SubParsersAction):
            for name, sub in action.choices.items():
                yield from _helps(sub, f"{prefix} {name}")


def test_no_help_text_shows_a_format_escape():
    for command, text in _helps(build_parser()):
        assert "%%" not in text, f"`{command} --help` prints a literal '%%'"
        assert "%(" not in text, f"`{command} --help` prints an unexpanded %(...)s"


@pytest.fixture
def fit_folder(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "sub").mkdir()
    (tmp_path / "sub" / "disk.csv").write_text(DATA)
    return tmp_path


def _write(text: str, name="sub/fit.toml"):
    with open(name, "w") as f:
        f.write(text)
    return name


@pytest.mark.parametrize("edit, message", [
    # a sampler setting of the wrong type: one line naming the table, not a traceback
    ('[sampler]\nnlive = "many"\n', "sub/fit.toml, [sampler]: nlive must be a whole number, got 'many'"),
    ('[sampler]\ndlogz = "small"\n', "sub/fit.toml, [sampler]: dlogz must be a number, got 'small'"),
    # the allowed values as words, not a Python tuple
    ('[sampler]\nbound = "ellipsoid"\n',
     "sub/fit.toml, [sampler]: bound must be one of 'none', 'single', 'multi', 'balls', 'cubes', got 'ellipsoid'"),
])
def test_sampler_settings_are_refused_in_plain_words(fit_folder, edit, message):
    path = _write(FIT + edit)
    with pytest.raises(InputError) as err:
        read_fit_description(path)
    assert str(err.value) == message


def test_out_of_range_and_blowout_priors_are_refused_once_naming_the_field(fit_folder):
    path = _write(FIT.replace("porosity = { prior", "porosity = 1.5\n# { prior"))
    with pytest.raises(InputError) as err:
        read_fit_description(path)
    assert str(err.value).startswith("sub/fit.toml, [parameters] porosity: porosity must lie in [0, 1)")
    path = _write(FIT.replace("upper = 10.0 }", 'upper = 10.0, relative_to = "blowout" }'))
    with pytest.raises(InputError) as err:
        read_fit_description(path)
    assert str(err.value).count("fit.toml") == 1 and "[parameters] a_min" in str(err.value)
    assert "[star] luminosity and mass" in str(err.value)


def test_photometry_problems_name_the_file_as_the_user_gave_it(fit_folder):
    (fit_folder / "sub" / "disk.csv").write_text(DATA + "no_such_band,1e-4,1e-5\n")
    spec = read_fit_description(_write(FIT))
    assert spec.photometry_path.is_absolute()
    with pytest.raises(InputError) as err:
        read_fit_photometry(spec)
    assert str(err.value).startswith("sub/disk.csv, row 3 (band 'no_such_band'): unknown band")
    assert str(fit_folder) not in str(err.value)


def test_a_missing_description_is_said_in_words(fit_folder, capsys):
    assert main(["fit", "nothere.toml"]) == 2
    err = capsys.readouterr().err
    assert err.strip() == "motes fit: error: nothere.toml: fit description not found"


def test_posterior_summary_carries_each_rows_unit():
    rng = np.random.default_rng(3)
    table = summarise_posterior(rng.uniform(1.0, 2.0, size=(50, 4)), ["f_silica", "porosity", "a_min", "angle"])
    assert list(table["unit"]) == ["", "", "um", "deg"]
    assert table.colnames[:2] == ["parameter", "unit"]


def test_grid_axis_profiles_carry_each_rows_unit():
    from motes.dust.grid.summary import _axis_table

    axes = {"porosity": [0.0, 0.3], "a_min": [1.0, 2.0]}
    ones = {k: np.ones(2) for k in axes}
    table = _axis_table(axes, ones, ones, {k: np.array([3, 3]) for k in axes}, 0.5)
    assert list(table["unit"]) == ["", "", "um", "um"]


def test_fit_and_grid_observations_carry_the_path_as_given(fit_folder):
    """Issue 14: summaries and later messages named the photometry by its absolute path."""
    from motes.dust.grid.spec import read_grid_description
    from motes.dust.grid.workers import read_grid_observations

    spec = read_fit_description(_write(FIT))
    assert read_fit_photometry(spec).path == "sub/disk.csv"
    grid = _write('[data]\nphotometry = "disk.csv"\n\n[star]\nteff = 5000.0\n\n'
                  '[[materials]]\nname = "silica"\nsource = "silica_amorphous"\n\n'
                  '[grid]\nfraction_step = 1.0\nporosity = [0.0, 0.3]\na_min = [1.0]\n', name="sub/grid.toml")
    gspec = read_grid_description(grid)
    assert gspec.photometry.is_absolute()          # kept absolute inside (resume checks, workers)
    assert read_grid_observations(gspec).path == "sub/disk.csv"


def test_optics_table_columns_stay_aligned_with_long_band_names(tmp_path):
    """Issue 14: a band identifier longer than the column (spitzer-irac_4.5) pushed its row out of line."""
    from motes.dust.model.mixture import compute_mixture_optics, read_mixture_file
    from motes.report import format_mixture_optics

    path = tmp_path / "mix.toml"
    path.write_text('[star]\nteff = 5800.0\n\n[[materials]]\nname = "silica"\nsource = "silica_amorphous"\n\n'
                    '[model]\nbands = ["2mass_j", "spitzer-irac_4.5"]\nwavelength_nodes = 2\n\n'
                    '[mixture]\nfractions = { silica = 1.0 }\nporosity = 0.2\na_min = 0.2\nq = 3.5\na_max = 2.0\n')
    text = format_mixture_optics(compute_mixture_optics(*read_mixture_file(path), spectrum_points=6))
    for head in ("m_eff (n + ik)", "R_pol [1/sr]"):
        lines = text.splitlines()
        start = next(i for i, line in enumerate(lines) if head in line)
        header, j_row, irac_row = lines[start:start + 3]
        column = header.index("pivot[µm]") + len("pivot[µm]")      # right edge of the pivot column
        assert j_row[:column].endswith("1.2391") and irac_row[:column].endswith("4.5020"), (j_row, irac_row)


def test_materials_listing_gives_the_density_unit(capsys):
    """Issue 14 ("units on every printed quantity"): the listing's density column had no unit."""
    assert main(["materials"]) == 0
    header = next(line for line in capsys.readouterr().out.splitlines() if line.startswith("name"))
    assert "density [g cm^-3]" in header and "range [um]" in header
