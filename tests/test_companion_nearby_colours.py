"""External check: the nearby dwarfs of test_companion_nearby_dwarfs typed from 2MASS J, H, Ks alone (issue 11).

Same 16 objects, same photometry (2MASS, from memory, see that file), no distance:
the colours-only mode with the default (field) type prior and with the flat one.
Two questions, measured on objects nothing was tuned to:

* are the 68% highest-density intervals honest? The count of objects whose
  published type lies inside one of them must fall in the central 90% binomial
  range of 0.68 for 16 draws (8-14), the criterion of issue 11;
* does the reported type (median of the most probable peak) lie within 1.5
  subtypes for at least 75% of them (issue 11's 15 of 20)? Not yet: marked
  xfail with the measured numbers and the reasons.

The 16 are spread over M4-T8 by choice, not drawn from the field population
that the default prior describes, so they favour the flat prior; neither prior
was changed for them.
"""

from __future__ import annotations

import pytest
from scipy.stats import binom

from motes.companion import ClassifySettings, classify, photometry_from_magnitudes, type_code
from motes.companion.spectral_types import type_label
from test_companion_nearby_dwarfs import NEARBY


def _typed(prior: str):
    out = []
    for name, j, h, ks, err, _plx, sptype in NEARBY:
        phot = photometry_from_magnitudes({"2mass_j": (j, err), "2mass_h": (h, err), "2mass_ks": (ks, err)},
                                          name=name)
        est = classify(phot, ClassifySettings(mode="colours", type_prior=prior, blackbody="never")).estimate
        out.append((name, type_code(sptype), est))
    return out


@pytest.fixture(scope="module", params=["field", "flat"])
def typed(request):
    return request.param, _typed(request.param)


def _report(prior, rows):
    print(f"\ncolours-only, J H Ks, {prior} prior:")
    for name, truth, est in rows:
        inside = any(a <= truth <= b for a, b, _ in est.intervals)
        print(f"  {name:<18} {type_label(truth):>5} -> {est.label:<48} diff {est.reported - truth:+5.1f}"
              f"{'' if inside else '  (outside the 68% HDI)'}")


def test_the_68_percent_intervals_are_honest(typed, capsys):
    prior, rows = typed
    covered = sum(any(a <= truth <= b for a, b, _ in est.intervals) for _, truth, est in rows)
    low, high = binom.interval(0.90, len(rows), 0.68)
    with capsys.disabled():
        _report(prior, rows)
        print(f"  68% HDI contains the published type {covered}/{len(rows)} (90% binomial range {low:.0f}-{high:.0f})")
    # measured (issue 11): field 11/16, flat 12/16 with the scale mixture over the template scatter;
    # 10/16 and 13/16 with the fixed 0.10 mag (the same before the sequence's own uncertainty was added)
    assert low <= covered <= high


@pytest.mark.xfail(strict=True, reason=(
    "measured (issue 11, with the per-band template scatter marginalised over a log-uniform prior on "
    "0.02-0.30 mag, ClassifySettings.colour_scatter_range, argued in classify.COLOUR_SCATTER_RANGE and fixed "
    "before this run): reported type within 1.5 subtypes for 7/16 (field prior; posterior median 7/16, mode "
    "of the most probable peak 7/16) and 7/16 (flat prior; median 9/16, peak mode 7/16); with the fixed 0.10 "
    "mag scatter before it: 5/16 and 6/16 (median 6 and 8, peak mode 6 and 7). The template with the lowest "
    "chi2 alone gets 9/16 (chi2 is still taken at 0.10 mag). Misses (field prior): Teegarden's star (M7 -> "
    "M3.6: its J-H = 0.51 is bluer than any M row of the sequence, 0.56-0.75), TRAPPIST-1 (M8 -> M6.0: the "
    "field density falls 4x from M6 to M7-M9), 2MASS J1439 (L1 -> M8.5), J0036 (L3.5 -> L0.2), J1507 (L5 -> "
    "L2.4) and DENIS J0255 (L9 -> L6): their colours are not the mean sequence's at their types; SDSS J1254 "
    "(T2 -> an M4 peak of 0.94), Gl 570D and 2MASS J0415 (late T -> a G peak of 0.5-0.7; the T peak is "
    "reported beside it): JHK of early T and early M, and of late T and G, coincide. Nothing was fitted to "
    "these 16. strict: remove this mark when the test passes"))
def test_the_reported_type_is_within_one_and_a_half_subtypes(typed, capsys):
    prior, rows = typed
    within = sum(abs(est.reported - truth) <= 1.5 for _, truth, est in rows)
    with capsys.disabled():
        print(f"\ncolours-only, {prior} prior: reported type within 1.5 subtypes {within}/{len(rows)}")
    assert within >= 0.75 * len(rows)
