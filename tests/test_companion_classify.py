"""classify(): well-known dwarfs, modes, limits, fallbacks, flags and bad input."""

from __future__ import annotations

import math

import numpy as np
import pytest

from motes.companion import (
    ClassifySettings,
    classify,
    load_dwarf_sequence,
    photometry_from_magnitudes,
    type_code,
)
from motes.errors import FitError, InputError
from motes.photometry import top_hat_band
from motes.report import format_classification, write_classification

# Nearby dwarfs with 2MASS J, H, Ks [mag], 1-sigma [mag], trigonometric parallax [mas] and
# spectral type. ALL VALUES FROM MEMORY (2MASS All-Sky Point Source Catalog, Skrutskie et al.
# 2006; parallaxes from Gaia DR3 where available, else the cited ground-based programmes);
# uncertainties approximate. Since issue 11 the built-in sequence is the published one
# (Mamajek 2024.05.15), not cross-checked against these objects; the larger external check,
# with sources per object, is tests/test_companion_nearby_dwarfs.py.
FAMOUS = [
    # name,                J       H       Ks      err    plx [mas]  type    type source
    ("Proxima Cen",       5.357,  4.835,  4.384,  0.03,  768.07,   "M5.5"),  # Gaia DR3; Bessell 1991
    ("Wolf 359",          7.085,  6.482,  6.084,  0.03,  415.2,    "M6"),    # Gaia DR3; Kirkpatrick et al. 1991
    ("VB 10",             9.908,  9.226,  8.765,  0.03,  168.0,    "M8"),    # Gaia DR3; Kirkpatrick et al. 1991
    ("TRAPPIST-1",       11.354, 10.718, 10.296,  0.03,   80.21,   "M8"),    # Gaia DR3; Gillon et al. 2016
    ("2MASS J0036+1821", 12.466, 11.588, 11.058,  0.03,  114.2,    "L3.5"),  # Dahn et al. 2002; Reid et al. 2000
    ("2MASS J1507-1627", 12.830, 11.895, 11.312,  0.03,  136.4,    "L5"),    # Dahn et al. 2002; Reid et al. 2000
    ("DENIS J0255-4700", 13.246, 12.204, 11.558,  0.03,  201.4,    "L9"),    # Costa et al. 2006; Kirkpatrick et al. 2008
    ("SDSS J1254-0122",  14.891, 14.090, 13.837,  0.04,   84.9,    "T2"),    # Dahn et al. 2002; Burgasser et al. 2006
    ("Gl 570D",          15.324, 15.268, 15.242,  0.10,  171.2,    "T7.5"),  # host Gl 570A, Hipparcos; Burgasser et al. 2006
    ("2MASS J0415-0935", 15.695, 15.537, 15.429,  0.12,  174.3,    "T8"),    # Vrba et al. 2004; Burgasser et al. 2006
]


@pytest.mark.parametrize("name, j, h, ks, err, plx, sptype", FAMOUS, ids=[f[0] for f in FAMOUS])
def test_well_known_dwarfs_are_typed_within_one_subtype(name, j, h, ks, err, plx, sptype):
    d = 1000.0 / plx
    phot = photometry_from_magnitudes({"2mass_j": (j, err), "2mass_h": (h, err), "2mass_ks": (ks, err)},
                                      distance_pc=d, distance_pc_error=0.005 * d, name=name)
    result = classify(phot)
    est = result.estimate
    assert est.mode == "distance" and est.source == "mean dwarf sequence"
    assert abs(est.median - type_code(sptype)) <= 1.0, f"{name}: {est.label} vs {sptype}"
    assert result.distance_check is not None


def _companion(label="L2", bands=("2mass_j", "2mass_h", "2mass_ks", "wise_w1"), d=30.0, err=0.05,
               shift=0.0, extra=None, limits=None):
    seq = load_dwarf_sequence()
    mu = 5 * math.log10(d / 10)
    mags = {b: (float(seq.value(b, label)) + mu + shift, err) for b in bands}
    return photometry_from_magnitudes({**mags, **(extra or {})}, distance_pc=d, distance_pc_error=0.01 * d,
                                      limits=limits, bands={"Lp": top_hat_band("Lp", 3.75, 0.7)})


def test_both_modes_and_the_table():
    result = classify(_companion())
    assert result.modes == ("distance", "colours")
    assert abs(result.estimate.median - type_code("L2")) < 0.5
    assert result.distance_check.consistent
    t = result.to_table()
    assert set(t["mode"]) == {"distance", "colours"} and t["probability"].unit is None
    for mode in ("distance", "colours"):
        sub = t[(t["mode"] == mode) & (t["source"] == "mean dwarf sequence")]
        assert sum(sub["probability"]) == pytest.approx(1.0)
    text = format_classification(result)
    assert "caveats" in text and "Young, low-gravity" in text and "distance check" in text


def test_background_star_is_flagged():
    # an M4 dwarf placed 20x farther than the host: colours say M4, the host distance says otherwise
    phot = _companion("M4", bands=("cousins_i", "2mass_j", "2mass_h", "2mass_ks", "wise_w1", "wise_w2"),
                      shift=5 * math.log10(20))
    result = classify(phot)
    assert not result.distance_check.consistent
    assert "background object" in result.distance_check.message
    assert any("background object" in f for f in result.flags)


def test_blackbody_fallback_is_said_and_uses_all_bands():
    phot = _companion(extra={"Lp": (20.0, 0.1)})
    result = classify(phot)
    assert result.blackbody_used
    bb = result.ranking("blackbody", "colours")
    assert "Lp" in bb.bands and "Lp" not in result.ranking("sequence", "distance").bands
    assert any("blackbody fallback used" in n and "Lp" in n for n in result.notes)
    never = classify(phot, ClassifySettings(blackbody="never"))
    assert not never.blackbody_used and any("Lp used by no ranking" in n for n in never.notes)


def test_explicit_mapping_is_reported():
    seq = load_dwarf_sequence()
    kp = top_hat_band("NIRC2.Kp", 2.12, 0.35)
    mags = {b: (float(seq.value(b, "L4")) + 2.0, 0.05) for b in ("2mass_j", "2mass_h")}
    mags["NIRC2.Kp"] = (float(seq.value("2mass_ks", "L4")) + 2.0, 0.05)
    phot = photometry_from_magnitudes(mags, distance_pc=25.1189, bands={"NIRC2.Kp": kp})
    plain = classify(phot, ClassifySettings(blackbody="never"))
    assert "NIRC2.Kp" not in plain.ranking("sequence", "distance").bands
    mapped = classify(phot, ClassifySettings(band_map=(("NIRC2.Kp", "2mass_ks"),)))
    ranking = mapped.ranking("sequence", "distance")
    assert "NIRC2.Kp" in ranking.bands and "2mass_ks" in ranking.template_bands
    assert any("explicit user mapping" in n for n in mapped.notes)
    assert abs(mapped.estimate.median - type_code("L4")) < 1.0


def test_upper_limit_rules_out_bright_templates():
    # an L6 seen in J, H only, with a W2 limit far too faint for an L6:
    # ranking with the limit must move away from the types the limit excludes
    # (L6, not T6 as before: the published sequence has no W2 beyond T2, see its header)
    seq = load_dwarf_sequence()
    mu = 5 * math.log10(15 / 10)
    w2_l6 = float(seq.value("wise_w2", "L6")) + mu
    no_limit = classify(_companion("L6", bands=("2mass_j", "2mass_h"), d=15.0), ClassifySettings(mode="distance"))
    limited = classify(_companion("L6", bands=("2mass_j", "2mass_h"), d=15.0, limits={"wise_w2": (w2_l6 - 1.0, 5.0)}),
                       ClassifySettings(mode="distance"))
    r = limited.ranking("sequence", "distance")
    assert "wise_w2" in r.bands
    # the limit is 1 mag brighter than L6's W2: consistent with L6, so L6 stays favoured ...
    assert abs(limited.estimate.median - type_code("L6")) < 1.0
    # ... while a limit 2 mag fainter than L6's W2 pushes the type away from L6
    pushed = classify(_companion("L6", bands=("2mass_j", "2mass_h"), d=15.0, limits={"wise_w2": (w2_l6 + 2.0, 5.0)}),
                      ClassifySettings(mode="distance"))
    assert abs(pushed.estimate.median - type_code("L6")) > abs(no_limit.estimate.median - type_code("L6"))


def test_extinction_is_marginalised():
    from motes.companion.extinction import extinction_coefficients
    from motes.photometry import get_band

    bands = ("cousins_i", "2mass_j", "2mass_h", "2mass_ks", "wise_w1", "wise_w2")
    coeff = extinction_coefficients([get_band(b) for b in bands])
    seq = load_dwarf_sequence()
    mags = {b: (float(seq.value(b, "M3")) + 3.0 + 2.0 * k, 0.03) for b, k in zip(bands, coeff)}
    phot = photometry_from_magnitudes(mags, distance_pc=39.81)
    result = classify(phot, ClassifySettings(extinction=True, av_steps=21))
    best = result.ranking("sequence", "distance").best
    assert abs(result.estimate.median - type_code("M3")) <= 1.0
    assert 1.0 < best.av < 3.0
    assert any("extinction fitted" in n for n in result.notes)


def test_write_classification(tmp_path):
    from astropy.table import Table

    paths = write_classification(classify(_companion()), tmp_path / "out", csv=True)
    # the ranked rows and the numeric estimates, each as ECSV and CSV
    assert [p.name for p in paths] == ["companion_classification.ecsv", "companion_classification_estimates.ecsv",
                                       "companion_classification.csv", "companion_classification_estimates.csv"]
    table = Table.read(paths[0])
    assert "probability" in table.colnames and table.meta["type_estimate"].startswith("L")
    assert not list((tmp_path / "out").glob(".*tmp"))


# ------------------------------------------------------------------ bad input
def test_all_upper_limits():
    phot = photometry_from_magnitudes({}, limits={"2mass_j": (18.0, 5.0), "2mass_h": (17.5, 5.0)},
                                      distance_pc=20.0)
    with pytest.raises(FitError, match="all 2 bands are upper limits"):
        classify(phot)


def test_too_few_detections_for_the_free_parameters():
    phot = photometry_from_magnitudes({"2mass_j": (15.0, 0.05)}, limits={"2mass_ks": (14.0, 5.0)})
    with pytest.raises(FitError, match="1 detection"):
        classify(phot, ClassifySettings(mode="colours", blackbody="never"))


def test_bands_no_template_covers():
    bands = {"NB1": top_hat_band("NB1", 3.1, 0.05), "NB2": top_hat_band("NB2", 3.3, 0.05)}
    phot = photometry_from_magnitudes({"NB1": (12.0, 0.1), "NB2": (12.2, 0.1)}, bands=bands)
    with pytest.raises(FitError, match="covers none of the observed bands"):
        classify(phot, ClassifySettings(blackbody="never"))
    # with blackbodies allowed the same input gives a colour temperature, said to be a fallback
    assert classify(phot).blackbody_used


def test_distance_mode_needs_a_distance():
    phot = photometry_from_magnitudes({"2mass_j": (15.0, 0.05), "2mass_ks": (14.0, 0.05)})
    with pytest.raises(FitError, match="needs the host's distance"):
        classify(phot, ClassifySettings(mode="distance"))


def test_bad_mapping_and_settings():
    phot = _companion()
    with pytest.raises(InputError, match="not in the photometry"):
        classify(phot, ClassifySettings(band_map=(("NIRC2.Kp", "2mass_ks"),)))
    with pytest.raises(InputError, match="tabulates only"):
        classify(phot, ClassifySettings(band_map=(("wise_w1", "MKO.Lp"),)))
    for bad in (dict(mode="fast"), dict(template_scatter=-0.1), dict(type_range=("T8", "M0")),
                dict(blackbody="sometimes")):
        with pytest.raises(InputError):
            ClassifySettings(**bad)


def test_settings_from_toml(tmp_path):
    path = tmp_path / "s.toml"
    path.write_text('[classify]\nmode = "colours"\ntemplate_scatter = 0.2\ntype_range = ["M0", "T9"]\n'
                    '[classify.band_map]\n"NIRC2.Kp" = "2mass_ks"\n')
    s = ClassifySettings.from_toml(path)
    assert s.mode == "colours" and s.band_map == (("NIRC2.Kp", "2mass_ks"),) and s.type_range == (60.0, 89.0)
    path.write_text('[classify]\nmodes = "colours"\n')
    with pytest.raises(InputError, match="unknown setting"):
        ClassifySettings.from_toml(path)


def test_types_without_a_tabulated_mass_print_no_mass():
    # the published sequence tabulates masses to L3 only: a T5 gets no mass, and says so
    result = classify(_companion("T5", bands=("2mass_j", "2mass_h", "2mass_ks"), d=10.0),
                      ClassifySettings(mode="distance"))
    assert abs(result.estimate.median - type_code("T5")) < 1.0
    assert not math.isfinite(result.estimate.mass.median)
    text = format_classification(result)
    assert "mass          : no mass" in text
    assert any(c.startswith("Masses are the mean sequence's") and "assumes a field age" in c for c in result.caveats)
    assert "assumes a field age" in text
    # straddling the last tabulated mass (L3): more than 1% of the probability has no mass -> none given
    straddle = classify(_companion("L3.5", bands=("2mass_j", "2mass_h", "2mass_ks"), d=10.0),
                        ClassifySettings(mode="distance"))
    assert not math.isfinite(straddle.estimate.mass.median)
    early = classify(_companion("M5", bands=("2mass_j", "2mass_h", "2mass_ks"), d=10.0), ClassifySettings(mode="distance"))
    assert 0.1 < early.estimate.mass.median < 0.2
