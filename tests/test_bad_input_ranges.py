"""Absurd finite values are refused with one clear line; valid data are read; OS errors are one line.

Physical ranges are declared in :mod:`motes.parameters` (``STAR_TEFF``,
``PARAMETERS["q"]``, ``REFRACTIVE_N``, ``EXTINCTION_K``, ``MAGNITUDE``).
"""

from __future__ import annotations

import errno
import os
from pathlib import Path

import numpy as np
import pytest

from motes.cli import main
from motes.errors import FitError, InputError, OpticalConstantsError
from motes.optics.constants import check_optical_constants, read_optical_constants
from motes.parameters import EXTINCTION_K, MAGNITUDE, PARAMETERS, REFRACTIVE_N, STAR_TEFF

from test_photometry_inputs import CSV, TOML, _write

DATA = Path(__file__).resolve().parents[1] / "src" / "motes" / "demo" / "data"


def _one_line_refusal(capsys, argv, *fragments):
    rc = main(argv)
    err = capsys.readouterr().err
    assert rc == 2, err
    lines = err.strip().splitlines()
    assert len(lines) == 1 and "Traceback" not in err, err
    for fragment in fragments:
        assert fragment in lines[0], (fragment, lines[0])
    return lines[0]


# ----------------------------------------------------------------------------- declared ranges
def test_declared_ranges():
    assert (STAR_TEFF.lo, STAR_TEFF.hi) == (500.0, 100000.0)
    assert PARAMETERS["q"].contains([0.0, 3.5, 10.0]).all() and not PARAMETERS["q"].contains([-0.1, 1e6]).any()
    assert not REFRACTIVE_N.contains([0.0, 1e200]).any() and EXTINCTION_K.contains([0.0, 300.0]).all()
    assert not MAGNITUDE.contains([1e308, -60.0]).any()


@pytest.mark.parametrize("teff", ["1e300", "30", "0"])
def test_host_teff_outside_the_stellar_range_is_refused(tmp_path, capsys, teff):
    target = _write(tmp_path / "in", toml=TOML.replace("teff_k = 4500", f"teff_k = {teff}"))
    out = tmp_path / "out"
    _one_line_refusal(capsys, ["photometry", str(target), "--output", str(out)],
                      "[host] teff_k", "[500, 100000]", "target.toml")
    assert not out.exists()


def test_contrast_of_1e308_mag_is_refused(tmp_path, capsys):
    target = _write(tmp_path / "in", table=CSV.replace("Lp,contrast_mag,6.0,", "Lp,contrast_mag,1e308,"))
    out = tmp_path / "out"
    _one_line_refusal(capsys, ["photometry", str(target), "--output", str(out)], "phot.csv", "Lp", "[-50, 50]")
    assert not out.exists()


def test_host_magnitude_of_1e308_is_refused(tmp_path, capsys):
    target = _write(tmp_path / "in", toml=TOML.replace('"2mass_j" = [7.0, 0.02]', '"2mass_j" = [1e308, 0.02]'))
    _one_line_refusal(capsys, ["photometry", str(target), "--output", str(tmp_path / "out")],
                      "[host.magnitudes]", "[-50, 50]")


def test_nan_results_are_never_written(tmp_path, monkeypatch):
    """The final check in write_photometry: a NaN magnitude stops the write (rc 2), whatever produced it."""
    from motes.photometry import calibrate, read_target
    from motes.report import photometry_text

    result = calibrate(read_target(_write(tmp_path / "in")))
    table = result.to_table()
    table["apparent_mag"][1] = np.nan
    monkeypatch.setattr(type(result), "to_table", lambda self: table)
    out = tmp_path / "out"
    with pytest.raises(InputError, match="apparent_mag.*not a finite number; nothing was written"):
        photometry_text.write_photometry(result, out)
    assert not list(out.glob("*.ecsv"))


def test_q_outside_its_range_is_refused_in_a_grid_and_a_fit(tmp_path):
    from motes.dust.grid.spec import read_grid_description
    from test_dust_grid import grid_text, write_photometry
    from dust_fit_toys import write_toy_fit

    write_photometry(tmp_path)
    path = tmp_path / "grid.toml"
    path.write_text(grid_text(extra="q = [3.5, 1e6]\n"))
    with pytest.raises(InputError, match=r"q .*must be in \[0, 10\]") as info:
        read_grid_description(path)
    assert str(path) in str(info.value)
    truth = {"fractions": {"alpha": 0.5, "beta": 0.5}, "porosity": 0.3, "a_min": 2.0, "q": 3.5}
    fit = write_toy_fit(tmp_path, truth, materials=("alpha", "beta"), rng=np.random.default_rng(1), parameters=(
        'porosity = 0.3\na_min = 2.0\nq = { prior = "uniform", lower = 3.0, upper = 1e6 }\n'))
    from motes.dust.fit.run import prepare_fit
    from motes.dust.fit.spec import read_fit_description
    from dust_fit_toys import toy_factory

    with pytest.raises((InputError, FitError), match=r"q must lie in \[0, 10\]"):
        prepare_fit(read_fit_description(fit), toy_factory)


def test_disk_star_teff_outside_the_stellar_range_is_refused(tmp_path):
    from motes.dust.model.mixture import read_mixture_file

    text = (DATA / "optics_mixture.toml").read_text().replace("teff = 5600.0", "teff = 1e300")
    path = tmp_path / "mix.toml"
    path.write_text(text)
    with pytest.raises(InputError, match=r"\[star\] teff.*\[500, 100000\]"):
        read_mixture_file(path)


# ----------------------------------------------------------------------------- n,k files
_NK = "0.5 1.5 0.01\n1.0 1.5 0.02\n2.0 1.4 0.03\n"


@pytest.mark.parametrize("column, row", [("n", "1.0 1e200 0.02\n"), ("k", "1.0 1.5 1e200\n")])
def test_nk_of_1e200_is_refused_by_materials_check_and_optics(tmp_path, capsys, column, row):
    path = tmp_path / "rock.txt"
    path.write_text(_NK.replace("1.0 1.5 0.02\n", row))
    _, problems, _ = check_optical_constants(path)
    assert any(f"line 2: {column} = 1e+200 is outside" in p for p in problems), problems
    with pytest.raises(OpticalConstantsError, match=f"{column} = 1e\\+200"):
        read_optical_constants(path)
    _one_line_refusal(capsys, ["materials", "check", str(path)], "rock.txt")


def test_nk_file_with_a_byte_order_mark_is_read(tmp_path):
    plain, marked = tmp_path / "plain.txt", tmp_path / "marked.txt"
    plain.write_text(_NK, encoding="utf-8")
    marked.write_text(_NK, encoding="utf-8-sig")
    assert marked.read_bytes().startswith(b"\xef\xbb\xbf")
    a, b = read_optical_constants(plain), read_optical_constants(marked)
    np.testing.assert_array_equal(a.wavelength, b.wavelength)
    np.testing.assert_array_equal(a.k, b.k)


def test_nk_descending_or_in_blocks_is_sorted_and_duplicates_are_refused(tmp_path):
    path = tmp_path / "rock.txt"
    path.write_text("2.0 1.4 0.03\n1.0 1.5 0.02\n0.5 1.5 0.01\n")
    np.testing.assert_array_equal(read_optical_constants(path).wavelength, [0.5, 1.0, 2.0])
    path.write_text("0.5 1.5 0.01\n1.0 1.5 0.02\n1.0 1.4 0.03\n")
    with pytest.raises(OpticalConstantsError, match="duplicated wavelength"):
        read_optical_constants(path)


# ----------------------------------------------------------------------------- byte-order marks in CSV
def test_photometry_csv_with_a_byte_order_mark_is_read(tmp_path):
    from motes.photometry import calibrate, read_target

    plain = _write(tmp_path / "plain")
    marked = _write(tmp_path / "marked")
    (tmp_path / "marked" / "phot.csv").write_text(CSV, encoding="utf-8-sig")
    a = calibrate(read_target(plain)).to_table()
    b = calibrate(read_target(marked)).to_table()
    np.testing.assert_array_equal(np.asarray(a["flux"]), np.asarray(b["flux"]))


def test_disk_photometry_csv_with_a_byte_order_mark_is_read(tmp_path):
    from motes.dust.observations import read_disk_photometry

    text = "band,value,error\n2mass_j,1.0e-5,1e-6\n2mass_h,1.2e-5,1e-6\n"
    (tmp_path / "plain.csv").write_text(text, encoding="utf-8")
    (tmp_path / "marked.csv").write_text(text, encoding="utf-8-sig")
    a, b = read_disk_photometry(tmp_path / "plain.csv"), read_disk_photometry(tmp_path / "marked.csv")
    assert a.band_names == b.band_names
    np.testing.assert_array_equal(a.value, b.value)


# ----------------------------------------------------------------------------- one line, not a traceback
def test_optics_output_naming_a_file_is_refused_before_the_work(tmp_path, capsys, monkeypatch):
    import motes.dust.model.mixture as mixture

    src = tmp_path / "mix.toml"
    src.write_text((DATA / "optics_mixture.toml").read_text())
    blocker = tmp_path / "taken"
    blocker.write_text("a file")

    def never(*args, **kwargs):
        raise AssertionError("computed although the output cannot be written")

    monkeypatch.setattr(mixture, "compute_mixture_optics", never)
    _one_line_refusal(capsys, ["optics", str(src), "--out", str(blocker)], "is a file, not a folder", "--out")
    assert blocker.read_text() == "a file"


@pytest.mark.skipif(os.geteuid() == 0, reason="root writes into read-only folders")
def test_materials_check_plot_into_an_unwritable_folder_is_one_line(tmp_path, capsys):
    path = tmp_path / "rock.txt"
    path.write_text(_NK)
    locked = tmp_path / "locked"
    locked.mkdir()
    locked.chmod(0o500)
    try:
        _one_line_refusal(capsys, ["materials", "check", str(path), "--plot", str(locked / "nk.png")], "locked")
    finally:
        locked.chmod(0o700)


def test_materials_check_plot_write_error_is_one_line(tmp_path, capsys, monkeypatch):
    """The same path as an unwritable folder, for any user: the writer raises PermissionError."""
    import motes.files

    path = tmp_path / "rock.txt"
    path.write_text(_NK)

    def refuse(name, *args, **kwargs):
        raise PermissionError(errno.EACCES, "Permission denied", str(name))

    monkeypatch.setattr(motes.files, "_temporary_path",
                        lambda p, suffix: refuse(p))
    line = _one_line_refusal(capsys, ["materials", "check", str(path), "--plot", str(tmp_path / "nk.png")],
                             "Permission denied", "nk.png")
    assert "run the same command again" in line
    assert not (tmp_path / "nk.png").exists()


def test_disk_full_during_a_fit_is_one_line_and_finished_models_are_kept(tmp_path, capsys, monkeypatch):
    """One worker, toy model: the disk fills up when the second model writes its results."""
    import motes.dust.fit.problem as fit_problem
    import motes.dust.fit.run as fit_run
    from dust_fit_toys import toy_factory, write_toy_fit

    truth = {"fractions": {"alpha": 0.6, "beta": 0.4}, "porosity": 0.3, "a_min": 2.0, "q": 3.5}
    path = write_toy_fit(tmp_path, truth, materials=("alpha", "beta"), rng=np.random.default_rng(3),
                         sampler="nlive = 40\ndlogz = 1.0\nseed = 1\n", parameters='porosity = 0.3\nq = 3.5\n'
                         'a_min = { prior = "log-uniform", lower = 0.5, upper = 10.0 }\n')
    monkeypatch.setattr(fit_problem, "build_colour_model", toy_factory)
    real = fit_run.write_result_table
    calls = []

    def filling_up(table, where):
        calls.append(where)
        if len(calls) == 4:                     # samples.ecsv of the second model
            raise OSError(errno.ENOSPC, "No space left on device", str(where))
        return real(table, where)

    monkeypatch.setattr(fit_run, "write_result_table", filling_up)
    out = tmp_path / "run"
    argv = ["fit", str(path), "--output", str(out), "--workers", "1", "--quiet", "--no-figures"]
    line = _one_line_refusal(capsys, argv, "No space left on device", "run the same command again")
    finished = sorted(p.parent.name for p in out.glob("models/*/result.json"))
    assert len(finished) == 1, finished
    kept = (out / "models" / finished[0] / "result.json").read_bytes()
    monkeypatch.setattr(fit_run, "write_result_table", real)
    assert main(argv) == 0, capsys.readouterr().err
    assert (out / "models" / finished[0] / "result.json").read_bytes() == kept     # read back, not redone
    assert len(list(out.glob("models/*/result.json"))) == 3 and line.startswith("motes fit: error:")   # each-removed: 3 models
