"""Band identifiers, the full filter library, band search, MKO bands and mapping checks."""

from __future__ import annotations

import math
import re
import subprocess
import sys

import numpy as np
import pytest

from motes.cli import main
from motes.companion import (
    MAPPING_PIVOT_TOLERANCE,
    ClassifySettings,
    classify,
    load_dwarf_sequence,
    mapping_pivot_warnings,
    photometry_from_magnitudes,
)
from motes.errors import BandError
from motes.photometry import (
    MKO_HALF_POWER_UM,
    RENAMED,
    band_entries,
    band_index,
    band_table,
    find_bands,
    get_band,
    search_bands,
    standard_band_names,
    top_hat_band,
)
from motes.photometry.band_names import library_keys
from motes.photometry.band_search import compute_band_index
from motes.photometry.bands import _pyphot_library

IDENTIFIER = r"^[a-z0-9]+(-[a-z0-9]+)*_[a-z0-9.]+$"


# ------------------------------------------------------------------ identifiers
@pytest.mark.parametrize("name, system", [
    ("2mass_ks", "2MASS"), ("wise_w1", "WISE"), ("spitzer-irac_3.6", "Spitzer/IRAC"),
    ("johnson_v", "Johnson-Cousins"), ("cousins_r", "Johnson-Cousins"), ("mko_lp", "MKO"),
    ("jwst-nircam_f444w", "JWST/NIRCam"), ("hst-wfc3_f160w", "HST/WFC3"), ("hst-nicmos2_f110w", "HST/NICMOS"),
    ("cfht-wircam_cfh8302", "CFHT/WIRCam"), ("panstarrs_g", "Pan-STARRS"), ("herschel-pacs_70", "Herschel/PACS"),
])
def test_new_identifiers_resolve_case_insensitively(name, system):
    band = get_band(name)
    assert band.name == name and band.system == system
    assert get_band(name.upper()).name == name


def test_every_identifier_follows_the_scheme():
    names = standard_band_names()
    assert len(names) == len(set(names))
    for name in names:
        assert re.match(IDENTIFIER, name), name
        assert name == name.lower()


@pytest.mark.parametrize("old, new", RENAMED.items())
def test_old_names_are_refused_with_the_new_identifier(old, new):
    with pytest.raises(BandError, match=f"band '{re.escape(old)}' is now called '{re.escape(new)}'"):
        get_band(old)
    with pytest.raises(BandError, match=re.escape(new)):
        get_band(old.lower())  # the refusal is case-insensitive too
    assert get_band(new).name == new


def test_old_name_refused_on_the_command_line(capsys):
    assert main(["bands", "IRAC.I1"]) == 2
    assert "'spitzer-irac_3.6'" in capsys.readouterr().err


def test_renamed_bands_keep_their_curve_and_calibration():
    # the renaming changes names only: IRAC ch1 is still the registry's 3.6 um curve, Johnson V has Vega = 0.03
    assert band_entries()["spitzer-irac_3.6"].key == "SPITZER_IRAC_36"
    assert get_band("johnson_v").vega_magnitude == 0.03 and get_band("johnson_v").response == "energy"
    assert get_band("sdss_u").native_system == "AB"


# --------------------------------------------------------- the whole library
def test_every_registry_curve_is_exposed_once():
    keys = set(library_keys())
    entries = band_entries()
    exposed = {e.key for e in entries.values() if e.key}
    assert exposed == keys and len(keys) == len(_pyphot_library().get_library_content())
    assert len(entries) == len(keys) + len(MKO_HALF_POWER_UM)


def test_every_band_has_a_system_response_and_zero_points():
    library = _pyphot_library()
    index = band_index()
    for name, entry in band_entries().items():
        row = index[name]
        assert row.system and row.native_system in ("Vega", "AB"), name
        if entry.key:
            assert row.response == library[entry.key].dtype, name
        assert row.pivot_um > 0 and row.wavelength_min_um < row.pivot_um < row.wavelength_max_um, name
        if row.wavelength_max_um <= 300.0:  # the CALSPEC Vega spectrum ends at 300 um
            assert row.vega_zero_point_jy > 0 and math.isfinite(row.ab_minus_vega), name
        else:
            assert math.isnan(row.vega_zero_point_jy), name


def test_band_index_matches_a_fresh_computation():
    # the index is a cache of values computed from the curves: recompute every one
    fresh = {r["name"]: r for r in compute_band_index()}
    index = band_index()
    assert set(fresh) == set(index)
    for name, r in fresh.items():
        row = index[name]
        assert row.response == r["response"], name
        for column in ("pivot_um", "fwhm_um", "wavelength_min_um", "wavelength_max_um", "vega_zero_point_jy"):
            a, b = getattr(row, column), r[column]
            assert (math.isnan(a) and math.isnan(b)) or a == pytest.approx(b, rel=1e-12), (name, column)


def test_index_zero_point_is_the_bands_own():
    band = get_band("2mass_ks")
    assert band_index()["2mass_ks"].vega_zero_point_jy == pytest.approx(band.vega_zero_point_jy, rel=1e-12)
    assert band_index()["2mass_ks"].ab_minus_vega == pytest.approx(band.ab_minus_vega, abs=1e-12)


def test_listing_needs_no_filter_library():
    # what keeps `motes bands` fast: listing and searching read the index, not the curves
    code = ("import sys\nfrom motes.photometry import band_table, format_band_table, find_bands\n"
            "assert len(band_table()) > 270 and find_bands('ice')\n"
            "format_band_table(band_table(find_bands(facility='jwst')))\n"
            "assert 'pyphot' not in sys.modules\n")
    subprocess.run([sys.executable, "-c", code], check=True)


def test_bands_lists_every_band_of_the_library(capsys):
    assert main(["bands"]) == 0
    out = capsys.readouterr().out
    for name in standard_band_names():
        assert name in out


# ------------------------------------------------------------------- search
def test_search_for_the_ice_band():
    found = find_bands("ice")
    names = [b.name for b in found]
    for expected in ("jwst-nircam_f300m", "jwst-nircam_f335m", "jwst-nircam_f356w", "wise_w1", "mko_lp"):
        assert expected in names
    assert "2mass_ks" not in names and "jwst-nircam_f200w" not in names
    assert all(b.wavelength_min_um < 3.7 and b.wavelength_max_um > 2.8 for b in found)


def test_search_by_wavelength_range_and_facility():
    found = find_bands(wavelength_range=(3.0, 3.5))
    assert found and all(3.0 <= b.pivot_um <= 3.5 for b in found)
    assert "wise_w1" in [b.name for b in found]
    assert [b.pivot_um for b in found] == sorted(b.pivot_um for b in found)
    nircam = find_bands(facility="jwst")
    assert len(nircam) == 29 and all(b.name.startswith("jwst-nircam_") for b in nircam)
    assert {b.name for b in find_bands(facility="mko")} == set(MKO_HALF_POWER_UM)
    assert {b.name for b in find_bands(facility="HST/NICMOS")} == {b.name for b in find_bands(facility="hst-nicmos")}
    assert [b.name for b in find_bands("f444w")] == ["jwst-nircam_f444w"]
    assert [b.name for b in find_bands("nircam", wavelength_range=(4.3, 4.5))] == ["jwst-nircam_f444w"]


def test_search_refusals():
    with pytest.raises(BandError, match="did you mean 'wise_w1'"):
        search_bands(["w1"])  # a band part alone is an incomplete name, not a search
    with pytest.raises(BandError, match="no standard band matches"):
        search_bands(["nircam"], wavelength_range=(10.0, 20.0))
    with pytest.raises(Exception, match="increasing"):
        find_bands(wavelength_range=(3.5, 3.0))


def test_search_on_the_command_line(capsys):
    assert main(["bands", "ice"]) == 0
    out = capsys.readouterr().out
    assert "jwst-nircam_f335m" in out and "ZP_Vega[Jy]" in out and "2mass_ks" not in out
    assert main(["bands", "--range", "3.0", "3.5"]) == 0
    out = capsys.readouterr().out
    assert "wise_w1" in out and "mko_lp" not in out
    assert main(["bands", "--facility", "mko"]) == 0
    out = capsys.readouterr().out
    assert all(n in out for n in MKO_HALF_POWER_UM) and "approximate" in out
    assert main(["bands", "--counting", "energy", "--facility", "mko"]) == 0
    assert "energy-counting" in capsys.readouterr().out
    assert main(["bands", "herschel-spire_500"]) == 0
    assert "does not cover" in capsys.readouterr().out


def test_search_table_has_the_zero_points_of_the_bands():
    t = band_table(find_bands(facility="2mass"))
    assert list(t["name"]) == ["2mass_j", "2mass_h", "2mass_ks"]
    for row in t:
        assert row["vega_zero_point"] == pytest.approx(get_band(row["name"]).vega_zero_point_jy, rel=1e-12)


def test_listing_notes_are_never_cut_mid_word():
    """Issue 14: the HST/JWST note was cut to "... give the syste" in the listing."""
    t = band_table(find_bands(facility="jwst-nircam") + find_bands(facility="herschel"))
    notes = set(t["note"])
    assert "Vega, AB or ST magnitudes in use" in notes
    assert "Catalogue flux densities assume nu f_nu = constant" in notes
    for note in notes:
        assert note == "" or note.endswith(("…", "use", "constant")) or note[-1].isalnum(), note
        assert "syste" not in note.split() and "give the" not in note


# ---------------------------------------------------------------------- MKO
# Vega in the MKO bands: Tokunaga & Vacca (2005), PASP 117, 421, Table 1 (from memory):
# F_lambda [W m^-2 um^-1] for J, H, K, L', M' and f_nu [Jy] for J, H, K, L'.
TV2005_FLAM = {"mko_j": 3.01e-9, "mko_h": 1.18e-9, "mko_k": 4.00e-10, "mko_lp": 5.31e-11, "mko_mp": 2.22e-11}
TV2005_FNU = {"mko_j": 1560.0, "mko_h": 1040.0, "mko_k": 645.0, "mko_lp": 253.0}
# Tolerance 3%: a top-hat between the half-power points has a pivot within ~0.5% of the real curve's
# (the real edges are steep and nearly symmetric); Vega's F_lambda falls as ~lambda^-4 in the near
# infrared, so ~2% in flux; plus ~1% between CALSPEC and the Vega model of Tokunaga & Vacca.
MKO_TOLERANCE = 0.03


@pytest.mark.parametrize("name", list(TV2005_FLAM))
def test_mko_vega_fluxes_match_tokunaga_vacca_2005(name):
    band = get_band(name)
    assert band.approximate and band.system == "MKO"
    assert band.vega_flux_lambda == pytest.approx(TV2005_FLAM[name], rel=MKO_TOLERANCE)
    if name in TV2005_FNU:
        assert band.vega_zero_point_jy == pytest.approx(TV2005_FNU[name], rel=MKO_TOLERANCE)


@pytest.mark.parametrize("name, edges", MKO_HALF_POWER_UM.items())
def test_mko_top_hats_are_at_half_power_at_the_published_points(name, edges):
    band = get_band(name)
    for edge in edges:
        assert np.interp(edge, band.wavelength, band.throughput) == pytest.approx(0.5, abs=1e-9)
    assert band.fwhm == pytest.approx(edges[1] - edges[0], rel=1e-9)


# --------------------------------------------------------------- mappings
def test_mapping_with_distant_pivots_warns():
    lp = top_hat_band("Lp", 3.77, 0.7)
    kp = top_hat_band("NIRC2.Kp", 2.12, 0.35)
    warnings = mapping_pivot_warnings([lp, kp], {"Lp": "wise_w1", "NIRC2.Kp": "2mass_ks"})
    offset = lp.pivot_wavelength / get_band("wise_w1").pivot_wavelength - 1
    assert offset > MAPPING_PIVOT_TOLERANCE
    assert len(warnings) == 1 and "Lp=wise_w1" in warnings[0] and f"{lp.pivot_wavelength:.3f}" in warnings[0]
    assert f"differ by {100 * offset:.0f}%" in warnings[0]
    assert f"{100 * MAPPING_PIVOT_TOLERANCE:.0f}%" in warnings[0]
    assert mapping_pivot_warnings([kp], {"NIRC2.Kp": "2mass_ks"}) == []


def test_classify_flags_a_distant_mapping_and_accepts_any_case():
    seq = load_dwarf_sequence()
    lp = top_hat_band("Lp", 3.77, 0.7)
    mags = {b: (float(seq.value(b, "L4")) + 2.0, 0.05) for b in ("2mass_j", "2mass_h", "2mass_ks")}
    mags["Lp"] = (float(seq.value("wise_w1", "L4")) + 2.0, 0.05)
    phot = photometry_from_magnitudes(mags, distance_pc=25.1189, bands={"Lp": lp})
    result = classify(phot, ClassifySettings(band_map=(("Lp", "WISE_W1"),), blackbody="never"))
    assert "wise_w1" in result.ranking("sequence", "distance").template_bands
    assert any("Lp=wise_w1" in f and "differ by" in f for f in result.flags)
    with pytest.raises(BandError, match="now called 'wise_w1'"):
        ClassifySettings(band_map=(("Lp", "WISE.W1"),))

