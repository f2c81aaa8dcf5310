"""Type prior, highest-density intervals, separate peaks and fit quality of `classify` (issue 11)."""

from __future__ import annotations

import math

import numpy as np
import pytest

from motes.companion import ClassifySettings, classify, load_dwarf_sequence, photometry_from_magnitudes, type_code
from motes.companion.classify import CAVEATS
from motes.companion.type_posterior import hdr_intervals, posterior_peaks
from motes.companion.type_prior import (FIELD_DENSITY, FIELD_LAST_CODE, FIELD_SMOOTHING, TypePrior,
                                       parse_type_prior)
from motes.errors import InputError

JHK = ("2mass_j", "2mass_h", "2mass_ks")


def _colours_only(label, bands=JHK, err=0.03, shift=3.0, **settings):
    """Noise-free sequence magnitudes of ``label``, shifted to an arbitrary distance, colours-only mode."""
    seq = load_dwarf_sequence()
    mags = seq.absolute_magnitudes([type_code(label)], list(bands))[0] + shift
    phot = photometry_from_magnitudes({b: (m, err) for b, m in zip(bands, mags)})
    return classify(phot, ClassifySettings(mode="colours", **settings))


# ----------------------------------------------------------------------------- the prior itself
#: Space densities of the census the field prior cites [1e-3 pc^-3], with the type range each covers:
#: G, K, all M: Mamajek 2016 (figshare 3206527); M3.0-M5.0 half of the M density (Reyle et al. 2021,
#: A&A 650, A201: "more than half"); M7-M9.5 and L0-L8 (>=): Cruz et al. 2007, AJ 133, 439.
CENSUS = [("G0", "K0", 4.8), ("K0", "M0", 10.5), ("M0", "L0", 59.2), ("M2.75", "M5.25", 29.6),
          ("M6.75", "L0", 4.9), ("L0", "T0", 3.8)]


@pytest.mark.parametrize("first, end, density", CENSUS)
def test_field_prior_integrates_to_the_census(first, end, density):
    starts = [b[0] for b in FIELD_DENSITY] + [FIELD_LAST_CODE]
    rho = [b[1] for b in FIELD_DENSITY]
    i, j = starts.index(type_code(first)), starts.index(type_code(end)) - 1
    # the bins hold the census values exactly ...
    assert sum(rho[k] * (starts[k + 1] - starts[k]) for k in range(i, j + 1)) == pytest.approx(density, rel=1e-9)
    # ... and the 1-subtype sliding average moves (neighbour - own density) / 8 across each edge
    # (a linear ramp over +-0.5 subtype: integral of the ramp on one side minus the step's)
    left = rho[i - 1] if i > 0 else rho[i]
    right = rho[j + 1] if j + 1 < len(rho) else rho[j]
    expected = density + (left - rho[i]) / 8 * FIELD_SMOOTHING + (right - rho[j]) / 8 * FIELD_SMOOTHING
    step = 0.001
    codes = np.arange(type_code(first) + step / 2, type_code(end), step)
    assert parse_type_prior("field").weights(codes).sum() * step == pytest.approx(expected, rel=1e-4)


def test_field_prior_excludes_nothing_and_peaks_at_mid_m():
    prior = parse_type_prior("field")
    codes = np.arange(40.0, 89.91, 0.1)
    weights = prior.weights(codes)
    assert np.all(weights > 0), "the default must not exclude any type of the sequence"
    assert 62.75 <= codes[np.argmax(weights)] < 65.25
    assert FIELD_DENSITY[0][0] == type_code("G0")


@pytest.mark.parametrize("value", ["M0=1,L0=0.5,T8=0.5", {"M0": 1, "L0": 0.5, "T8": 0.5},
                                   (("M0", 1), ("L0", 0.5), ("T8", 0.5))])
def test_knots_are_linear_between_and_zero_outside(value):
    prior = parse_type_prior(value)
    assert prior.name == "knots"
    w = prior.weights([type_code("K9"), type_code("M0"), type_code("M5"), type_code("T8"), type_code("T9")])
    assert list(w) == pytest.approx([0.0, 1.0, 0.75, 0.5, 0.0])


@pytest.mark.parametrize("value, message", [
    ("fieldish", "TYPE=WEIGHT"),
    ("M0=1", "at least two knots"),
    ("M0=1,T8=-1", ">= 0"),
    ("M0=1,T8=x", "must be a number"),
    ("M0=0,T8=0", "excludes every template"),
    ("M0=1,M0.0=2", "twice"),
    ("Q0=1,T8=1", "cannot read spectral type"),
])
def test_bad_priors_are_refused(value, message):
    with pytest.raises(InputError, match=message):
        ClassifySettings(type_prior=value)


def test_a_prior_outside_the_sequence_is_refused_before_anything_is_fitted():
    # T9.5-Y0 are rows of the sequence since issue 11, but MKO ones: the grid for 2MASS photometry stops at T9
    with pytest.raises(InputError, match="excludes every template") as info:
        _colours_only("M5", type_prior="T9.5=1,Y0=1")
    assert "type_prior" in str(info.value)
    with pytest.raises(InputError, match="excludes every template"):   # knots outside --types
        _colours_only("M5", type_prior="G0=1,K0=1", type_range=("M0", "T9"))


def test_type_prior_from_toml(tmp_path):
    path = tmp_path / "s.toml"
    path.write_text('[classify]\nmode = "colours"\n[classify.type_prior]\nM0 = 1.0\nT8 = 0.5\n')
    settings = ClassifySettings.from_toml(path)
    assert isinstance(settings.type_prior, TypePrior) and settings.type_prior.name == "knots"
    path.write_text('[classify]\ntype_prior = "flat"\n')
    assert ClassifySettings.from_toml(path).type_prior.name == "flat"
    path.write_text('[classify]\ntype_prior = "nonsense"\n')
    with pytest.raises(InputError, match="s.toml"):
        ClassifySettings.from_toml(path)


# ----------------------------------------------------------------------------- prior in the classifier
def test_flat_result_is_reported_beside_the_prior_one():
    result = _colours_only("M4")
    est = result.estimate
    assert est.prior == "field" and est.flat is not None and est.flat.prior == "flat"
    r = result.ranking("sequence", "colours")
    codes = r.grid["type_code"]
    k = codes < 60
    # the same likelihood, weighed differently: K types carry less under the field prior
    assert r.grid["probability"][k].sum() < r.grid["probability_flat"][k].sum()
    post = r.grid["probability_flat"] * parse_type_prior("field").weights(codes)
    np.testing.assert_allclose(r.grid["probability"], post / post.sum(), rtol=1e-10, atol=1e-300)
    flat = _colours_only("M4", type_prior="flat")
    assert flat.estimate.flat is None and flat.estimate.prior == "flat"
    assert flat.estimate.median == pytest.approx(est.flat.median, abs=1e-9)


# ----------------------------------------------------------------------------- intervals and peaks
def test_hdi_of_a_gaussian_is_plus_minus_one_sigma():
    x = np.round(np.arange(40.0, 89.0001, 0.1), 6)
    p = np.exp(-0.5 * ((x - 65.0) / 1.5) ** 2)
    (lo, hi, prob), = hdr_intervals(x, p)
    # whole cells of 0.1: the content is >= 0.68 by at most one cell
    assert lo == pytest.approx(65.0 - 0.994 * 1.5, abs=0.1) and hi == pytest.approx(65.0 + 0.994 * 1.5, abs=0.1)
    assert 0.68 <= prob < 0.68 + 0.03


def test_separate_peaks_never_share_an_interval():
    x = np.round(np.arange(40.0, 89.0001, 0.1), 6)
    p = 0.6 * np.exp(-0.5 * ((x - 63.0) / 1.0) ** 2) + 0.4 * np.exp(-0.5 * ((x - 86.0) / 1.0) ** 2)
    intervals = hdr_intervals(x, p)
    assert len(intervals) == 2 and intervals[0][1] < 70 < intervals[1][0]
    peaks = posterior_peaks(x, p)
    assert [round(pk[0]) for pk in peaks] == [63, 86]
    assert [pk[3] for pk in peaks] == pytest.approx([0.6, 0.4], abs=1e-3)   # the mixture weights
    assert sum(pk[3] for pk in peaks) == pytest.approx(1.0)


def test_a_shallow_dip_is_not_a_gap():
    x = np.round(np.arange(40.0, 89.0001, 0.1), 6)
    # two overlapping bumps: the density between them stays above half the HDR threshold
    p = np.exp(-0.5 * ((x - 64.0) / 1.0) ** 2) + np.exp(-0.5 * ((x - 66.2) / 1.0) ** 2)
    assert len(hdr_intervals(x, p)) == 1


def test_hdi_is_computed_in_its_own_variable():
    # uniform in c on [0, 1], v = exp(c): density of v is 1/v on [1, e], so the 68% HDI in v is
    # [1, exp(0.68)], not the image of any type interval chosen without looking at v
    c = np.linspace(0.0005, 0.9995, 1000)
    (lo, hi, prob), = hdr_intervals(np.exp(c), np.ones_like(c))
    assert lo == pytest.approx(1.0, abs=2e-3) and hi == pytest.approx(math.exp(0.68), abs=5e-3)


def test_teff_interval_comes_from_teff():
    est = _colours_only("L2").estimate
    assert est.teff.intervals and est.teff.lower < est.teff.median < est.teff.upper
    # every Teff interval is inside the sequence's Teff range and none spans its whole width
    seq = load_dwarf_sequence()
    assert all(seq.columns["teff"].min() - 100 <= lo < hi <= seq.columns["teff"].max() + 100
               for lo, hi, _ in est.teff.intervals)


def test_late_t_in_jhk_has_a_t_peak_and_a_g_peak():
    # the documented degeneracy: late-T and G/K 2MASS colours coincide
    est = _colours_only("T7.5").estimate
    assert len(est.peaks) >= 2
    classes = {int(pk.median // 10) for pk in est.peaks}
    assert {4, 8} <= classes   # a G peak and a T peak
    assert "separate peaks" in est.label
    result = _colours_only("T7.5")
    assert any("separate peaks" in f for f in result.flags)


def test_the_band_named_as_separating_the_peaks_does():
    before = _colours_only("L2").estimate
    assert len(before.peaks) == 2 and before.separating_bands
    band, diff = before.separating_bands[0]
    assert abs(diff) >= 0.3
    # measure that band (the L2's own value) and the second peak goes away
    after = _colours_only("L2", bands=JHK + (band,)).estimate
    assert len(after.peaks) == 1 and abs(after.reported - type_code("L2")) < 1.0


# ----------------------------------------------------------------------------- goodness of fit
def test_poor_fit_is_labelled_least_bad_and_flagged_in_tables():
    phot = photometry_from_magnitudes({"2mass_j": (15.0, 0.03), "2mass_h": (13.0, 0.03), "2mass_ks": (14.5, 0.03)},
                                      distance_pc=20.0, distance_pc_error=0.2)
    result = classify(phot, ClassifySettings())
    est = result.estimate
    assert est.poor_fit and est.fit_p_value < 1e-3
    assert est.label.startswith("least-bad template") and "no template fits" in est.label
    assert any("no template fits" in f for f in result.flags)
    table = result.to_table()
    assert bool(table["poor_fit"][0]) and table.meta["poor_fit"] is True
    assert all(result.estimates_table()["poor_fit"])


def test_good_fit_says_it_fits():
    est = _colours_only("M8").estimate
    assert not est.poor_fit and est.fit_p_value > 0.05 and "fits" in est.fit_text


# ----------------------------------------------------------------------------- tables, report, caveats
def test_estimates_table_has_numeric_columns():
    result = _colours_only("T7.5")
    t = result.estimates_table()
    assert list(t["type_prior"]) == ["field", "flat"]
    for name in ("type_reported", "type_median", "type_hdi_lower", "type_hdi_upper", "peak1_type",
                 "peak1_probability", "peak2_type", "teff_median", "teff_lower", "teff_upper",
                 "distance_median", "fit_p_value"):
        assert t[name].dtype.kind == "f", name
    assert str(t["teff_median"].unit) == "K" and str(t["distance_median"].unit) == "pc"
    row = t[0]
    est = result.estimate
    assert row["type_reported"] == pytest.approx(est.reported)
    assert row["n_peaks"] == len(est.peaks) and row["peak1_probability"] >= row["peak2_probability"]
    assert row["estimate"] == est.label


def test_written_files_and_report(tmp_path):
    from motes.report import format_classification, write_classification, write_classification_report

    result = _colours_only("M8")
    paths = write_classification(result, tmp_path)
    assert sorted(p.name for p in paths) == ["companion_classification.ecsv",
                                             "companion_classification_estimates.ecsv"]
    from astropy.table import Table

    back = Table.read(tmp_path / "companion_classification_estimates.ecsv")
    assert back["type_median"][0] == pytest.approx(result.estimate.median)
    text = format_classification(result)
    path = write_classification_report(text, result, tmp_path)
    assert path.read_text(encoding="utf-8") == text + "\n"


def test_every_documented_caveat_is_printed():
    from motes.report import format_classification

    text = format_classification(_colours_only("M8"))
    for caveat in CAVEATS:
        assert caveat in text
    for phrase in ("late-T dwarfs and G/K stars have similar 2MASS colours", "mean of field dwarfs",
                   "redder in the near-infrared", "unresolved equal-mass binary", "assumes a field age",
                   "Extinction", "a spectrum confirms it"):
        assert phrase in text, phrase
