"""External check: well-studied nearby dwarfs typed by the built-in sequence (distance known).

The built-in sequence is the published mean dwarf sequence (Pecaut & Mamajek 2013;
Mamajek 2024.05.15, see src/motes/data/dwarf_sequence.txt). These objects are
independent of it as far as this test is concerned: individual stars and brown
dwarfs with their own 2MASS photometry, trigonometric parallax and spectral type
from spectroscopy. Each is fed to ``classify`` in distance-known mode with J, H
and Ks only; the posterior median type must lie within 1 subtype of the
published type. Nothing in the sequence or the classifier is tuned to them: a
miss is reported and marked xfail with the measured offset and its reason.

ALL VALUES FROM MEMORY, none looked up for this test: 2MASS J, H, Ks from the
2MASS All-Sky Point Source Catalog (Skrutskie et al. 2006, AJ 131, 1163), with
one approximate 1-sigma per object; parallaxes from the programme named in the
row; spectral types (optical for M and L, near-infrared for T) from the paper
named in the row.
"""

from __future__ import annotations

import pytest

from motes.companion import ClassifySettings, classify, photometry_from_magnitudes, type_code

NEARBY = [
    # name,                J       H       Ks     err   plx [mas] type    parallax; type (all from memory)
    ("Barnard's star",     5.244,  4.834,  4.524, 0.03, 546.98, "M4"),    # Gaia DR3; Kirkpatrick et al. 1991
    ("Proxima Cen",        5.357,  4.835,  4.384, 0.04, 768.07, "M5.5"),  # Gaia DR3; Bessell 1991
    ("Wolf 359",           7.085,  6.482,  6.084, 0.03, 415.18, "M6"),    # Gaia DR3; Kirkpatrick et al. 1991
    ("Teegarden's star",   8.394,  7.883,  7.585, 0.03, 260.99, "M7"),    # Gaia DR3; Alonso-Floriano et al. 2015
    ("VB 10",              9.908,  9.226,  8.765, 0.03, 168.0,  "M8"),    # Gaia DR3; Kirkpatrick et al. 1991
    ("TRAPPIST-1",        11.354, 10.718, 10.296, 0.03,  80.21, "M8"),    # Gaia DR3; Gillon et al. 2016
    ("LHS 2065",          11.212, 10.469,  9.942, 0.03, 116.8,  "M9"),    # Gaia DR3; Kirkpatrick et al. 1995
    ("2MASS J1439+1929",  12.759, 12.041, 11.546, 0.03,  69.6,  "L1"),    # Dahn et al. 2002; Kirkpatrick et al. 1999
    ("2MASS J0036+1821",  12.466, 11.588, 11.058, 0.03, 114.2,  "L3.5"),  # Dahn et al. 2002; Reid et al. 2000
    ("2MASS J1507-1627",  12.830, 11.895, 11.312, 0.03, 136.4,  "L5"),    # Dahn et al. 2002; Reid et al. 2000
    ("2MASS J0825+2115",  15.100, 13.792, 13.028, 0.04,  93.8,  "L7.5"),  # Dahn et al. 2002; Kirkpatrick et al. 2000
    ("DENIS J0255-4700",  13.246, 12.204, 11.558, 0.03, 201.4,  "L9"),    # Costa et al. 2006; Kirkpatrick et al. 2008
    ("SDSS J1254-0122",   14.891, 14.090, 13.837, 0.04,  84.9,  "T2"),    # Dahn et al. 2002; Burgasser et al. 2006
    ("2MASS J1503+2525",  13.937, 13.856, 13.963, 0.05, 157.2,  "T5"),    # Dupuy & Liu 2012; Burgasser et al. 2006
    ("Gl 570D",           15.324, 15.268, 15.242, 0.10, 171.2,  "T7.5"),  # host Gl 570A, Hipparcos; Burgasser et al. 2006
    ("2MASS J0415-0935",  15.695, 15.537, 15.429, 0.12, 174.3,  "T8"),    # Vrba et al. 2004; Burgasser et al. 2006
]

#: Measured misses (name -> reason); filled only from a run, never by tuning.
KNOWN_MISSES: dict[str, str] = {
    "2MASS J0825+2115": (
        "measured (issue 11): L8.5 (68%: L7.9-L9.1) for L7.5, +1.02 subtypes. Its M_J = 14.96 (from the "
        "values above) is that of the sequence's L9-T0 (14.8) and its M_Ks = 12.89 that of L8.5: the object "
        "is ~0.5 mag fainter in J than the mean L7.5 (M_J 14.50 interpolated), about the source's quoted "
        "+-0.4 mag scatter of M_J at fixed type. Not tuned."),
}


def _cases():
    out = []
    for row in NEARBY:
        marks = [pytest.mark.xfail(strict=True, reason=KNOWN_MISSES[row[0]])] if row[0] in KNOWN_MISSES else []
        out.append(pytest.param(*row, id=row[0], marks=marks))
    return out


def test_the_sample_spans_m_to_t():
    codes = sorted(type_code(row[-1]) for row in NEARBY)
    assert len(NEARBY) >= 10 and codes[0] < type_code("L0") <= type_code("T0") <= codes[-1]


@pytest.mark.parametrize("name, j, h, ks, err, plx, sptype", _cases())
def test_nearby_dwarf_typed_within_one_subtype(name, j, h, ks, err, plx, sptype, capsys):
    d = 1000.0 / plx
    # the parallaxes are good to ~1% or better (from memory); 1% of the distance is used for all
    phot = photometry_from_magnitudes({"2mass_j": (j, err), "2mass_h": (h, err), "2mass_ks": (ks, err)},
                                      distance_pc=d, distance_pc_error=0.01 * d, name=name)
    est = classify(phot, ClassifySettings(mode="distance")).estimate
    diff = est.median - type_code(sptype)
    with capsys.disabled():
        print(f"\n{name:<18} {sptype:>5} -> {est.label:<26} diff {diff:+.2f}")
    assert est.mode == "distance" and est.source == "mean dwarf sequence"
    assert abs(diff) <= 1.0, f"{name}: {est.label} vs {sptype} ({diff:+.2f} subtypes)"
