"""User spectral libraries: folder convention, units, cache, bad input, use in classify."""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from astropy.io import fits

from motes.companion import ClassifySettings, classify, photometry_from_magnitudes, read_library
from motes.companion import library as library_module
from motes.companion.blackbody import R_JUP_PC
from motes.errors import InputError
from motes.photometry import get_band, top_hat_band
from motes.photometry.spectra import blackbody_flux_lambda

WL = np.geomspace(0.4, 6.0, 3000)  # um
TYPES = {"M5": 3000.0, "L0": 2200.0, "L5": 1600.0, "T5": 1100.0}


def _flux_at_10pc(teff):
    """A blackbody of 1 R_Jup at 10 pc [W m^-2 um^-1]: stands in for a real spectrum."""
    return math.pi * blackbody_flux_lambda(WL, teff) * (R_JUP_PC / 10.0) ** 2


def _write_text(path, teff, header=()):
    lines = list(header) + [f"{w:.6f} {f:.6e}" for w, f in zip(WL, _flux_at_10pc(teff))]
    path.write_text("\n".join(lines) + "\n")


def make_library(folder, calibration="at_10pc"):
    folder.mkdir()
    entries = []
    for i, (label, teff) in enumerate(TYPES.items()):
        name = f"obj{i}.txt"
        _write_text(folder / name, teff)
        entries.append(f'[[spectrum]]\nfile = "{name}"\nspectral_type = "{label}"\nteff_k = {teff:.0f}\n')
    (folder / "motes-library.toml").write_text(
        '[library]\nname = "test dwarfs"\nwavelength_unit = "um"\nflux_unit = "W m-2 um-1"\n'
        f'calibration = "{calibration}"\n\n' + "\n".join(entries))
    return folder


def test_index_and_header_conventions(tmp_path):
    lib = make_library(tmp_path / "lib")
    # a spectrum labelled only in its own header, in nm and erg/s/cm2/A, observed at 20 pc
    flux_cgs = _flux_at_10pc(1800.0) * 0.25 / 10.0  # at 20 pc, W m-2 um-1 -> erg s-1 cm-2 A-1
    lines = ["# spectral_type: L3", "# teff_k: 1800", "# calibration: observed", "# distance_pc: 20",
             "# wavelength_unit: nm", "# flux_unit: erg s-1 cm-2 Angstrom-1"]
    lines += [f"{w * 1000:.4f},{f:.6e}" for w, f in zip(WL, flux_cgs)]
    (lib / "extra.csv").write_text("\n".join(lines) + "\n")
    library = read_library(lib, cache_dir=None)
    assert len(library) == 5 and library.name == "test dwarfs"
    extra = next(s for s in library.spectra if s.path.endswith("extra.csv"))
    assert extra.label == "L3" and extra.teff == 1800 and extra.calibration == "observed"
    grid = library.grid([get_band("2mass_j"), get_band("2mass_ks")])
    ref = library.spectra[0]
    # observed at 20 pc, converted to absolute: equals the same source written at 10 pc
    direct = [float(b.vega_magnitude_of(b.average_flux_lambda(WL, _flux_at_10pc(1800.0))))
              for b in (get_band("2mass_j"), get_band("2mass_ks"))]
    np.testing.assert_allclose(grid.magnitudes[list(library.spectra).index(extra)], direct, atol=2e-4)
    assert grid.absolute.all() and ref.absolute


def test_fits_table_and_image(tmp_path):
    folder = tmp_path / "fitslib"
    folder.mkdir()
    flux = _flux_at_10pc(2000.0)
    cols = [fits.Column(name="WAVELENGTH", format="D", unit="um", array=WL),
            fits.Column(name="FLUX", format="D", unit="W m-2 um-1", array=flux)]
    table = fits.BinTableHDU.from_columns(cols)
    table.header["SPTYPE"] = "L1"
    table.header["CALIB"] = "at_10pc"
    fits.HDUList([fits.PrimaryHDU(), table]).writeto(folder / "a.fits")
    lin = np.linspace(0.4, 6.0, 5000)
    image = fits.PrimaryHDU(np.interp(lin, WL, flux))
    image.header.update(CRVAL1=0.4, CDELT1=lin[1] - lin[0], CRPIX1=1.0, CUNIT1="um", BUNIT="W m-2 um-1",
                        SPTYPE="L1", TEFF=2000.0, CALIB="at_10pc")
    image.writeto(folder / "b.fits")
    library = read_library(folder, cache_dir=None)
    grid = library.grid([get_band("2mass_h")])
    assert grid.magnitudes[0, 0] == pytest.approx(grid.magnitudes[1, 0], abs=2e-3)
    assert np.isnan(library.spectra[0].teff) and library.spectra[1].teff == 2000.0


def test_synthetic_magnitudes_are_cached_on_disk(tmp_path, monkeypatch):
    lib = make_library(tmp_path / "lib")
    cache = tmp_path / "cache"
    bands = [get_band("2mass_j"), top_hat_band("Lp", 3.75, 0.7)]
    first = read_library(lib, cache_dir=cache).grid(bands).magnitudes
    stored = json.loads((cache / "synthetic-magnitudes.json").read_text())
    assert stored["format"] == "motes-synthetic-magnitudes" and len(stored["magnitudes"]) == 8

    def refuse(*_args):
        raise AssertionError("synthesised again despite the cache")

    monkeypatch.setattr(library_module, "_synthesise", refuse)
    again = read_library(lib, cache_dir=cache).grid(bands).magnitudes
    np.testing.assert_array_equal(first, again)
    # another band definition (a wider top-hat) is not in the cache
    with pytest.raises(AssertionError, match="synthesised again"):
        read_library(lib, cache_dir=cache).grid([top_hat_band("Lp", 3.75, 0.8)])


def test_uncovered_band_is_nan_not_an_error(tmp_path):
    library = read_library(make_library(tmp_path / "lib"), cache_dir=None)
    grid = library.grid([get_band("wise_w3")])  # 12 um, beyond the 6 um spectra
    assert np.isnan(grid.magnitudes).all()


@pytest.mark.parametrize("problem, match", [
    ("unlabelled", "unlabelled spectrum"),
    ("binary", "not a UTF-8 text spectrum"),
    ("unit", "flux unit"),
    ("missing", "not found"),
    ("distance", "needs distance_pc"),
    ("toml", "malformed TOML"),
])
def test_bad_library_input_names_the_file(tmp_path, problem, match):
    lib = make_library(tmp_path / "lib")
    index = lib / "motes-library.toml"
    if problem == "unlabelled":
        _write_text(lib / "stray.dat", 1500.0)
    elif problem == "binary":
        (lib / "junk.txt").write_bytes(bytes(range(256)) * 4)
    elif problem == "unit":
        index.write_text(index.read_text().replace('flux_unit = "W m-2 um-1"', 'flux_unit = "furlongs"'))
    elif problem == "missing":
        index.write_text(index.read_text() + '\n[[spectrum]]\nfile = "ghost.txt"\nspectral_type = "L2"\n')
    elif problem == "distance":
        index.write_text(index.read_text().replace('calibration = "at_10pc"', 'calibration = "observed"'))
    elif problem == "toml":
        index.write_text(index.read_text() + "\n[[spectrum\n")
    with pytest.raises(InputError, match=match) as info:
        read_library(lib, cache_dir=None)
    assert str(lib) in str(info.value)


def test_library_ranks_the_matching_spectrum_first(tmp_path):
    library = read_library(make_library(tmp_path / "lib"), cache_dir=None)
    bands = ["2mass_j", "2mass_h", "2mass_ks", "wise_w1"]
    truth = library.spectra[1]  # "L0", 2200 K
    mags = {b: (float(get_band(b).vega_magnitude_of(get_band(b).average_flux_lambda(WL, truth.flux_lambda)))
                + 5 * math.log10(25 / 10), 0.05) for b in bands}
    phot = photometry_from_magnitudes(mags, distance_pc=25.0, distance_pc_error=0.5)
    result = classify(phot, ClassifySettings(mode="both", use_sequence=False), library=library)
    for mode in ("distance", "colours"):
        ranking = result.ranking("library", mode)
        assert ranking.best.label.startswith("L0"), (mode, ranking.best.label)
        assert ranking.bands == tuple(bands)
    assert result.ranking("library", "colours").best.distance_pc == pytest.approx(25.0, rel=0.02)


def test_relative_spectra_take_part_in_colours_only(tmp_path):
    library = read_library(make_library(tmp_path / "lib", calibration="relative"), cache_dir=None)
    mags = {"2mass_j": (14.0, 0.05), "2mass_h": (13.3, 0.05), "2mass_ks": (12.8, 0.05)}
    result = classify(photometry_from_magnitudes(mags, distance_pc=30.0), ClassifySettings(mode="both",
                      use_sequence=False), library=library)
    assert result.ranking("library", "distance") is None
    colours = result.ranking("library", "colours")
    assert colours is not None and np.isnan(colours.best.distance_pc)
