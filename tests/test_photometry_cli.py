"""`motes bands` and `motes photometry` as a user runs them, and the public API surface."""

from __future__ import annotations

import subprocess
import sys

import pytest

from motes.cli import main
from motes.demo import photometry as demo_part
from motes.photometry import band_table, standard_band_names


def test_bands_lists_every_standard_band(capsys):
    assert main(["bands"]) == 0
    out = capsys.readouterr().out
    for name in standard_band_names():
        assert name in out
    assert "ZP_Vega[Jy]" in out and "AB-Vega" in out and "m(Vega)" in out


def test_bands_one_band_with_plot(tmp_path, capsys):
    plot = tmp_path / "ks.png"
    assert main(["bands", "2MASS_KS", "--plot", str(plot)]) == 0
    out = capsys.readouterr().out
    assert "2mass_ks" in out and "pivot wavelength" in out and str(plot) in out
    assert plot.stat().st_size > 1000


def test_bands_energy_counting_changes_zero_points():
    photon = band_table(["2mass_ks"], counting="photon")["vega_zero_point"][0]
    energy = band_table(["2mass_ks"], counting="energy")["vega_zero_point"][0]
    assert photon != energy and abs(photon / energy - 1) < 0.01


def test_bands_from_a_target_file(tmp_path, capsys):
    demo_part.write_inputs(tmp_path)
    target = str(tmp_path / demo_part.TARGET_FILE)
    assert main(["bands", "--target", target]) == 0
    out = capsys.readouterr().out
    assert "Lp" in out and "NB3p1" in out and "approximate" in out
    assert main(["bands", "Lp", "--target", target]) == 0
    assert "top-hat" in capsys.readouterr().out


def test_bands_unknown_name_suggests(capsys):
    assert main(["bands", "W1"]) == 2
    err = capsys.readouterr().err
    assert "wise_w1" in err and len(err.strip().splitlines()) == 1


def test_photometry_command_on_demo(tmp_path, capsys):
    demo_part.write_inputs(tmp_path)
    out_dir = tmp_path / "results"
    assert main(["photometry", str(tmp_path / demo_part.TARGET_FILE), "--output", str(out_dir), "--csv"]) == 0
    out = capsys.readouterr().out
    assert "distance modulus" in out and "S A" in out  # Lp: synthesised host magnitude, approximate band
    assert (out_dir / "velmora_b_photometry.ecsv").is_file() and (out_dir / "velmora_b_photometry.csv").is_file()
    assert str(out_dir / "velmora_b_photometry.ecsv") in out


@pytest.mark.parametrize("command", ["bands", "photometry"])
def test_help_has_examples(command, capsys):
    with pytest.raises(SystemExit):
        main([command, "--help"])
    assert "examples:" in capsys.readouterr().out


def test_exported_names_exist_in_a_fresh_interpreter():
    code = (
        "import importlib\n"
        "for mod in ['motes.photometry', 'motes.photometry.measurements', 'motes.photometry.targets',"
        " 'motes.photometry.conversions', 'motes.photometry.synthesis', 'motes.report.photometry_text',"
        " 'motes.photometry.catalogue', 'motes.demo.photometry']:\n"
        "    m = importlib.import_module(mod)\n"
        "    missing = [n for n in m.__all__ if not hasattr(m, n)]\n"
        "    assert not missing, (mod, missing)\n"
        "from motes.photometry.measurements import BandPhotometry, CalibratedPhotometry, read_target, calibrate\n"
    )
    subprocess.run([sys.executable, "-c", code], check=True)
