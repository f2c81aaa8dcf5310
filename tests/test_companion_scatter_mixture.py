"""The colours-only mode's template scatter as an unknown of the object (a scale mixture, issue 11).

``ClassifySettings.colour_scatter_range`` (default 0.02-0.30 mag, argued in
``motes.companion.classify.COLOUR_SCATTER_RANGE``) replaces the fixed per-band
template scatter of the dwarf sequence, in the colours-only mode, by a
log-uniform prior over that range, marginalised on ``COLOUR_SCATTER_NODES``
nodes. Checked here: the nodes, the mixture against an independent sum of
fixed-scatter evidences, the limit of a one-point range, that the
distance-known mode does not change, and bad settings.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.special import logsumexp

from motes.companion import ClassifySettings, classify, load_dwarf_sequence, photometry_from_magnitudes
from motes.companion.classify import (
    COLOUR_SCATTER_NODES,
    COLOUR_SCATTER_RANGE,
    OFFSET_PRIOR_LOWER,
    OFFSET_PRIOR_WIDTH,
    colour_scatter_nodes,
    sequence_colour_scatter,
)
from motes.companion.likelihood import FlatOffset, offset_marginal
from motes.errors import InputError
from motes.photometry import get_band

BANDS = ("2mass_j", "2mass_h", "2mass_ks")
# an invented L3-like companion (numbers made up for this test)
MAGS = {"2mass_j": (14.20, 0.04), "2mass_h": (13.35, 0.04), "2mass_ks": (12.80, 0.04)}


def _ranking(result, mode):
    return next(r for r in result.rankings if r.mode == mode and r.kind == "sequence")


def test_the_nodes_are_log_uniform_midpoints():
    nodes = colour_scatter_nodes((0.02, 0.30))
    assert nodes.size == COLOUR_SCATTER_NODES
    steps = np.diff(np.log(nodes))
    assert np.allclose(steps, steps[0]) and steps[0] == pytest.approx(math.log(15.0) / COLOUR_SCATTER_NODES)
    assert math.exp(np.mean(np.log(nodes))) == pytest.approx(math.sqrt(0.02 * 0.30))   # centred in ln sigma
    assert 0.02 < nodes[0] < nodes[-1] < 0.30
    assert np.array_equal(colour_scatter_nodes((0.1, 0.1)), [0.1])
    assert ClassifySettings().colour_scatter_range == COLOUR_SCATTER_RANGE


def test_the_mixture_is_the_mean_of_the_fixed_scatter_evidences():
    """Template probabilities = prior x mean over the nodes of exp(ln Z(sigma)), computed here from
    offset_marginal directly (flat type prior, so that only the likelihood is compared)."""
    phot = photometry_from_magnitudes(MAGS)
    result = classify(phot, ClassifySettings(mode="colours", type_prior="flat", blackbody="never"))
    ranking = _ranking(result, "colours")
    grid = load_dwarf_sequence().grid([get_band(b) for b in BANDS], step=0.1)
    keep = np.isin(np.round(grid.type_code, 6), np.round(ranking.grid["type_code"], 6))
    templates = np.flatnonzero(keep)
    model = grid.magnitudes[templates]
    obs = np.array([MAGS[b][0] for b in BANDS])
    err = np.array([MAGS[b][1] for b in BANDS])
    prior = FlatOffset(OFFSET_PRIOR_LOWER, OFFSET_PRIOR_LOWER + OFFSET_PRIOR_WIDTH)
    ln_z = []
    for s in colour_scatter_nodes(COLOUR_SCATTER_RANGE):
        scatter = sequence_colour_scatter(grid, templates, np.arange(3), s)
        ln_z.append(offset_marginal(model, obs, err, np.ones(3, bool), scatter, prior).ln_evidence)
    mixed = logsumexp(np.stack(ln_z), axis=0)
    expected = np.exp(mixed - logsumexp(mixed))
    assert np.allclose(ranking.grid["probability"], expected, rtol=1e-9, atol=1e-15)
    # and it is not the fixed-scatter answer: the mixture is sharper where the colours fit closely
    fixed = _ranking(classify(phot, ClassifySettings(mode="colours", type_prior="flat", blackbody="never",
                                                     colour_scatter_range=None)), "colours")
    assert not np.allclose(ranking.grid["probability"], fixed.grid["probability"])
    assert ranking.grid["probability"].max() > fixed.grid["probability"].max()
    # chi2 and the best offset stay those at template_scatter
    assert np.allclose(ranking.grid["chi2"], fixed.grid["chi2"])
    assert any("log-uniform on 0.02-0.3 mag" in n for n in ranking.notes)


def test_a_one_point_range_at_the_template_scatter_is_the_fixed_scatter():
    phot = photometry_from_magnitudes(MAGS)
    one = _ranking(classify(phot, ClassifySettings(mode="colours", colour_scatter_range=(0.1, 0.1),
                                                   blackbody="never")), "colours")
    fixed = _ranking(classify(phot, ClassifySettings(mode="colours", colour_scatter_range=None,
                                                     blackbody="never")), "colours")
    assert np.allclose(one.grid["probability"], fixed.grid["probability"], rtol=1e-12, atol=1e-15)


def test_the_distance_known_mode_does_not_change():
    phot = photometry_from_magnitudes(MAGS, distance_pc=20.0, distance_pc_error=0.2)
    a = _ranking(classify(phot, ClassifySettings(mode="distance")), "distance")
    b = _ranking(classify(phot, ClassifySettings(mode="distance", colour_scatter_range=None)), "distance")
    assert np.array_equal(a.grid["probability"], b.grid["probability"])


@pytest.mark.parametrize("bad", [(0.0, 0.3), (0.3, 0.1), (0.1,), "wide", (0.1, math.inf)])
def test_bad_ranges_are_refused(bad):
    with pytest.raises(InputError, match="colour_scatter_range"):
        ClassifySettings(colour_scatter_range=bad)


def test_a_toml_list_is_read(tmp_path):
    path = tmp_path / "settings.toml"
    path.write_text("[classify]\ncolour_scatter_range = [0.03, 0.2]\n", encoding="utf-8")
    assert ClassifySettings.from_toml(path).colour_scatter_range == (0.03, 0.2)
    path.write_text("[classify]\ncolour_scatter_range = [0.3, 0.2]\n", encoding="utf-8")
    with pytest.raises(InputError, match="colour_scatter_range"):
        ClassifySettings.from_toml(path)
