"""Photometric boundness test: analytic limits of its pieces, synthetic cases from the sequence,
the distance check on a two-peaked posterior, the table, the text and the colour-magnitude diagram."""

from __future__ import annotations

import math
from types import SimpleNamespace

import numpy as np
import pytest

from motes.companion import (
    BoundnessSettings,
    classify,
    load_dwarf_sequence,
    photometry_from_magnitudes,
    photometric_boundness,
    type_label,
    with_boundness,
)
from motes.companion.galaxy import (
    GalacticModel,
    cumulative_surface_density,
    extinction_along_sight,
    field_type_density,
    prior_odds,
)
from motes.companion.summary_stats import distance_check
from motes.errors import InputError

HOST_PC = 5.7          # the issue's host distance
JHK = ("2mass_j", "2mass_h", "2mass_ks")


def _synthetic(label, shift=0.0, err=0.05, d=HOST_PC, name="synthetic"):
    """Sequence magnitudes of ``label`` at the host's distance d, moved ``shift`` mag fainter."""
    seq = load_dwarf_sequence()
    mu = 5 * math.log10(d / 10)
    mags = {b: (float(seq.value(b, label)) + mu + shift, err) for b in JHK}
    return photometry_from_magnitudes(mags, distance_pc=d, distance_pc_error=0.01 * d, name=name)


# ---------------------------------------------------------------- pieces against closed forms
def test_counts_of_a_uniform_dust_free_population_are_n_d3_over_3():
    # one type, M = 10 mag, density 0.01 pc^-3, m < 15: d_lim = 100 pc, N = n d^3 / 3 per steradian
    sigma = cumulative_surface_density(15.0, [10.0], [0.01], kind="uniform", limit=1e4, av_per_kpc=0.0,
                                       n_nodes=4000)
    expected = 0.01 * 100.0**3 / 3.0 / (180 / math.pi * 3600) ** 2
    assert sigma == pytest.approx(expected, rel=2e-3)   # trapezoid in ln d with a cut at d_lim
    # Euclidean counts: 0.6 dex per magnitude
    fainter = cumulative_surface_density(16.0, [10.0], [0.01], kind="uniform", limit=1e4, av_per_kpc=0.0,
                                         n_nodes=4000)
    assert math.log10(fainter / sigma) == pytest.approx(0.6, abs=0.01)


def test_extinction_through_a_dust_layer():
    # in the plane (Sun in the plane): a_V d; towards the pole: a_V h (1 - exp(-d/h))
    assert float(extinction_along_sight(2000.0, 0.0, 1.0, 125.0, 0.0)) == pytest.approx(2.0)
    pole = float(extinction_along_sight(2000.0, 90.0, 1.0, 125.0, 0.0))
    assert pole == pytest.approx(1e-3 * 125.0 * (1 - math.exp(-2000 / 125)), rel=1e-9)
    # monotonic in distance, and the same through the layer towards b and -b with the Sun in the plane
    d = np.geomspace(1, 1e4, 50)
    av = extinction_along_sight(d, 20.0, 1.0, 125.0, 0.0)
    assert np.all(np.diff(av) > 0)
    assert np.allclose(av, extinction_along_sight(d, -20.0, 1.0, 125.0, 0.0))


def test_galactic_model_is_one_at_the_sun_and_falls_with_height():
    g = GalacticModel()
    assert float(g.density(0.0, 0.0, 0.0)) == pytest.approx(1.0)
    up = g.density(np.array([100.0, 300.0, 1000.0]), 0.0, 90.0)
    assert np.all(np.diff(up) < 0)
    # towards the pole within the thin disk the fall-off is close to exp(-z/300 pc)
    assert float(up[1] / up[0]) == pytest.approx(math.exp(-200 / 300), rel=0.1)


def test_field_density_in_absolute_units():
    # class M integrates to the census value behind the field prior, 5.92e-2 pc^-3 (Mamajek 2016, quoted
    # in motes.companion.type_prior); the 1-subtype smoothing moves ~1% across the class edges
    codes = np.arange(60.0, 70.0, 0.01) + 0.005
    m_density = float(np.sum(field_type_density(codes)) * 0.01)
    assert m_density == pytest.approx(59.2e-3, rel=0.03)
    assert float(field_type_density(95.0)) == 0.0       # nothing beyond class T


def test_prior_odds():
    assert prior_odds(1e-4) == pytest.approx(1e4, rel=1e-3)
    assert prior_odds(math.log(2)) == pytest.approx(1.0)       # P(at least one) = 1/2
    assert math.isnan(prior_odds(math.nan))


# ---------------------------------------------------------------- synthetic cases from the sequence
def test_the_issue_background_m4_is_not_a_confident_bound_companion():
    # issue 11: an M4 placed 10x beyond a host at 5.7 pc was typed as a bound T2
    for settings in (BoundnessSettings(),
                     BoundnessSettings(galactic_l_deg=120.0, galactic_b_deg=40.0, separation_mas=2000.0)):
        test = photometric_boundness(_synthetic("M4", shift=5.0), settings)
        assert test.verdict != "bound", (test.verdict, test.ln_bayes_factor)
        assert test.flags
        assert test.background.type.median < test.bound.type.median - 10   # early M behind vs T at the host


def test_a_large_b_from_the_prior_volume_alone_is_not_bound():
    # M0 ten times beyond a host at 5.7 pc, Galactic prior to 30 kpc: B ~ 1e3 (the prior puts little
    # probability at 74 pc), but the colours fit better as a K7 at ~74 pc (chi2 0.1) than as any
    # template at the host (an M7, chi2 3.0): the photometry does not point to the host
    s = BoundnessSettings(galactic_l_deg=120.0, galactic_b_deg=40.0)
    test = photometric_boundness(_synthetic("M0", shift=5.0), s)
    assert test.ln_bayes_factor > math.log(150)
    assert test.colours_prefer_background and test.verdict == "ambiguous"
    assert test.bound.chi2 - test.background.chi2 > 2.0
    assert test.background.distance.lower > 5.7
    assert any("volume of the line-of-sight prior" in f for f in test.flags)
    assert "Akaike" in test.rule and bool(test.to_table()["colours_prefer_background"][0])
    # the same M0 at the host: the background reading overlaps the host's distance, no veto
    at_host = photometric_boundness(_synthetic("M0"), s)
    assert at_host.verdict == "bound" and not at_host.colours_prefer_background


def test_a_companion_at_the_host_distance_is_bound_and_b_scales_with_the_cube_of_the_limit():
    test = photometric_boundness(_synthetic("L3"))
    assert test.verdict == "bound" and not test.flags
    assert abs(test.bound.type.median - 73.0) < 1.0
    assert test.settings.prior_kind == "uniform" and test.settings.limit_pc == 1000.0
    # the background posterior sits well inside the limit: B(0.5 L) and B(2 L) are B / 8 and 8 B
    (_, half), (_, double) = test.sensitivity
    assert test.ln_bayes_factor - half == pytest.approx(math.log(8), abs=0.2)
    assert double - test.ln_bayes_factor == pytest.approx(math.log(8), abs=0.2)


def test_prior_odds_enter_p_bound():
    s = BoundnessSettings(galactic_l_deg=120.0, galactic_b_deg=40.0, separation_mas=1000.0,
                          source_density_arcsec2=1e-4)
    test = photometric_boundness(_synthetic("L3"), s)
    assert test.expected_number == pytest.approx(math.pi * 1e-4)
    bo = test.bayes_factor * test.prior_odds
    assert test.p_bound == pytest.approx(bo / (1 + bo))
    assert test.surface_density_source == "given by the user"


@pytest.mark.slow
@pytest.mark.parametrize("settings", [BoundnessSettings(),
                                      BoundnessSettings(galactic_l_deg=120.0, galactic_b_deg=40.0)],
                         ids=["uniform", "galaxy-b40"])
def test_sequence_objects_at_the_host_and_ten_times_beyond(settings, capsys):
    """Every whole subtype M0-T8 (29), JHK with 0.05 mag errors, host at 5.7 pc.

    Measured (issue 11, not tuned; field type prior): at the host 23/29 bound with either prior,
    the rest (T2-T8: JHK of T dwarfs are matched by distant G-M stars) ambiguous, none background;
    10x beyond none called bound with either prior. (Before the prior-volume veto, 2/29 - M0 and
    M1 at b = 40° - were called bound: a late M at the host matches their JHK with chi2 3-5, while
    the background reading fits with chi2 0.1.)
    """
    at_host, behind = [], []
    for code in range(60, 89):
        at_host.append(photometric_boundness(_synthetic(type_label(code)), settings).verdict)
        behind.append(photometric_boundness(_synthetic(type_label(code), shift=5.0), settings).verdict)
    with capsys.disabled():
        print(f"\nat host: {dict((v, at_host.count(v)) for v in set(at_host))}; "
              f"10x beyond: {dict((v, behind.count(v)) for v in set(behind))}")
    assert at_host.count("background") == 0
    assert at_host.count("bound") >= 23
    assert behind.count("bound") == 0


def test_bad_settings_are_refused():
    with pytest.raises(InputError, match="distance_prior"):
        BoundnessSettings(distance_prior="cone")
    with pytest.raises(InputError, match="Galactic coordinates"):
        BoundnessSettings(distance_prior="galaxy")
    with pytest.raises(InputError, match="galactic_b_deg"):
        BoundnessSettings(galactic_l_deg=10.0, galactic_b_deg=95.0)
    with pytest.raises(InputError, match="unknown setting|not_a_key"):
        BoundnessSettings.from_mapping({"not_a_key": 1})
    s = BoundnessSettings.from_mapping({"separation_arcsec": 1.5, "source_density_deg2": 3600.0**2})
    assert s.separation_mas == pytest.approx(1500.0) and s.source_density_arcsec2 == pytest.approx(1.0)


def test_settings_take_quantities():
    import astropy.units as u

    s = BoundnessSettings(separation_mas=1.2 * u.arcsec, galactic_l_deg=1 * u.rad, galactic_b_deg=0.5 * u.rad,
                          distance_limit_pc=2 * u.kpc)
    assert s.separation_mas == pytest.approx(1200.0) and s.limit_pc == pytest.approx(2000.0)
    assert s.galactic_b_deg == pytest.approx(math.degrees(0.5))


# ---------------------------------------------------------------- the distance check
def test_distance_check_uses_the_mass_near_the_host_not_a_median():
    # two peaks at distance moduli 0 and 10 with equal mass; the host at 5 sits at the median,
    # in the empty gap: a median-based check called that consistent
    ranking = SimpleNamespace(grid={"probability": np.array([0.5, 0.5]), "offset": np.array([0.0, 10.0]),
                                    "offset_error": np.array([0.1, 0.1])})
    settings = SimpleNamespace(luminosity_scatter=0.3, tension_sigma=3.0)
    check = distance_check(ranking, 5.0, 0.01, 100.0, settings)
    assert not check.consistent
    on_peak = distance_check(ranking, 10.0, 0.01, 1000.0, settings)
    assert on_peak.consistent


# ---------------------------------------------------------------- outputs
def test_table_text_and_colour_magnitude_diagram(tmp_path):
    from motes.report import format_boundness, format_classification, plot_colour_magnitude, write_classification

    result = with_boundness(classify(_synthetic("M4", shift=5.0, name="fake")),
                            BoundnessSettings(separation_mas=1500.0))
    test = result.boundness
    table = test.to_table()
    for column in ("ln_bayes_factor", "p_bound", "prior_odds", "expected_number", "bound_type_code",
                   "background_distance", "background_av", "ln_bayes_factor_alt1"):
        assert column in table.colnames
    assert table["background_distance"].unit == "pc" and len(table) == 1
    text = format_boundness(test)
    assert "P(bound)" in text and "bound reading" in text and "rule" in text
    assert "is it bound? (photometry)" in format_classification(result)
    assert any("photometric boundness" in f for f in result.flags)
    paths = write_classification(result, tmp_path)
    assert any(p.name.endswith("_boundness.ecsv") for p in paths)
    png = plot_colour_magnitude(result, tmp_path / "cmd.png")
    assert png.is_file() and png.stat().st_size > 10000
    with pytest.raises(InputError, match="dwarf sequence tabulates"):
        plot_colour_magnitude(result, tmp_path / "bad.png", bands=("2mass_j", "wise_w1", "2mass_j"))


@pytest.mark.slow
def test_real_dwarfs_at_their_own_distance_and_ten_times_beyond(capsys):
    """The nearby dwarfs of test_companion_nearby_dwarfs (published 2MASS JHK and parallaxes, from
    memory) as companions of a host at their own distance, and moved 10x beyond it (+5 mag).

    Measured (issue 11, uniform prior to 1 kpc): 12/16 at their distance bound, the four T dwarfs
    ambiguous, none background; of the 16 moved behind none is called bound (12 background, 4 ambiguous).
    The four T dwarfs (no separation, so the verdict rests on B >= 150): B = 0.47 (T2), 44 (T5), 68
    (T7.5), 1.2 (T8) with the uniform prior; with the Galactic prior at b = 40 deg, 9.3, 125, 3.1, 0.76,
    where the background reading fits (an M0 at ~500 pc for the T2, p 0.35; G dwarfs 1.4-3 kpc away for
    the late T, p 0.05-0.85, within their 0.05-0.12 mag errors): the JHK degeneracy, left as it is
    (docs/companion.md section 10 gives the table and the alternatives measured).
    """
    from test_companion_nearby_dwarfs import NEARBY

    at_host, behind = [], []
    for name, j, h, ks, err, plx, sptype in NEARBY:
        d = 1000.0 / plx
        for shift, out in ((0.0, at_host), (5.0, behind)):
            phot = photometry_from_magnitudes({"2mass_j": (j + shift, err), "2mass_h": (h + shift, err),
                                               "2mass_ks": (ks + shift, err)}, distance_pc=d,
                                              distance_pc_error=0.01 * d, name=name)
            out.append(photometric_boundness(phot).verdict)
    with capsys.disabled():
        print(f"\nreal dwarfs at their distance: {dict((v, at_host.count(v)) for v in set(at_host))}; "
              f"10x beyond: {dict((v, behind.count(v)) for v in set(behind))}")
    assert at_host.count("background") == 0 and at_host.count("bound") >= 12
    assert behind.count("bound") == 0


@pytest.mark.slow
def test_noisy_sequence_objects_at_the_host_and_ten_times_beyond():
    """M0-L9 (20 subtypes), 10 noisy JHK draws each (0.05 mag), Galactic prior at b = 40°.

    Measured (issue 11, seed 1, not tuned): at the host 200/200 bound; 10x beyond 3/200 bound
    (M0, M1: draws in which the late-M reading at the host fits within chi2 2 of the background
    one - the limit of JHK at 0.05 mag), 67 ambiguous, 130 background. At 0.03 mag: 200/200 and
    0/200. The bounds below allow for nothing but that measurement's binomial scatter.
    """
    seq = load_dwarf_sequence()
    rng = np.random.default_rng(1)
    settings = BoundnessSettings(galactic_l_deg=120.0, galactic_b_deg=40.0)
    mu = 5 * math.log10(HOST_PC / 10)
    at_host, behind = [], []
    for code in range(60, 80):
        for shift, out in ((0.0, at_host), (5.0, behind)):
            for _ in range(10):
                mags = {b: (float(seq.value(b, type_label(code))) + mu + shift + rng.normal(0, 0.05), 0.05)
                        for b in JHK}
                phot = photometry_from_magnitudes(mags, distance_pc=HOST_PC, distance_pc_error=0.01 * HOST_PC)
                out.append(photometric_boundness(phot, settings).verdict)
    assert at_host.count("bound") >= 195 and at_host.count("background") == 0
    assert behind.count("bound") <= 7      # 3 measured; 7 is its binomial 2-sigma-ish upper bound
