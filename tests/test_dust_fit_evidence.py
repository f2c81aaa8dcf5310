"""Ranking, Bayes factors, the strength scale and the per-material verdict rule."""

from __future__ import annotations

import math

import numpy as np
import pytest

from motes.dust.fit.evidence import (VERDICT_RULE, ModelEvidence, material_verdicts, rank_models, strength_of,
                                 summarise_posterior)
from motes.dust.fit.spec import build_model_set
from motes.errors import FitError

MATS = ("silica", "ice", "carbon")


def _m(mats, ln_z, err=0.1):
    return ModelEvidence("+".join(mats), tuple(mats), ln_z, err)


@pytest.mark.parametrize("ln_b, label", [
    # Kass & Raftery (1995), JASA 90, 773, sec. 3.2: breaks at 2 ln B = 2, 6, 10
    (0.5, "hardly any"), (0.999, "hardly any"), (1.0, "modest"), (2.9, "modest"),
    (3.0, "firm"), (4.99, "firm"), (5.0, "overwhelming"), (-4.0, "firm"),
])
def test_strength_scale_breaks(ln_b, label):
    assert strength_of(ln_b) == label


def test_removed_in_turn_verdicts():
    models = [_m(MATS, 10.0), _m(("silica", "carbon"), 2.0), _m(("silica", "ice"), 11.5),
              _m(("ice", "carbon"), 9.0)]
    v = {x.material: x for x in material_verdicts(models, MATS, full_name="silica+ice+carbon")}
    assert v["ice"].verdict == "needed" and v["ice"].ln_b == pytest.approx(8.0)
    assert v["ice"].pairing == "removed in turn" and v["ice"].without_model == "silica+carbon"
    assert v["carbon"].verdict == "not needed" and v["carbon"].ln_b == pytest.approx(-1.5)
    assert v["silica"].verdict == "undecided" and v["silica"].ln_b == pytest.approx(1.0)
    assert v["ice"].ln_b_err == pytest.approx(math.hypot(0.1, 0.1))


def test_verdict_needs_the_threshold_beyond_twice_the_uncertainty():
    # ln B = 3.5 but sigma = 0.4: 3.5 - 0.8 < 3 -> undecided
    models = [_m(("silica", "ice"), 5.5, 0.2828), _m(("silica",), 2.0, 0.2828)]
    v = material_verdicts(models, ("silica", "ice"), full_name="silica+ice")
    assert v[1].verdict == "undecided"
    models = [_m(("silica", "ice"), 5.5, 0.1), _m(("silica",), 2.0, 0.1)]
    assert material_verdicts(models, ("silica", "ice"), full_name="silica+ice")[1].verdict == "needed"
    # ln B = -1.2 with sigma 0.2: -1.2 + 0.4 > -1 -> undecided; with sigma 0.05 -> not needed
    models = [_m(("silica", "ice"), 0.8, 0.1414), _m(("silica",), 2.0, 0.1414)]
    assert material_verdicts(models, ("silica", "ice"), full_name="silica+ice")[1].verdict == "undecided"
    models = [_m(("silica", "ice"), 0.8, 0.035), _m(("silica",), 2.0, 0.035)]
    assert material_verdicts(models, ("silica", "ice"), full_name="silica+ice")[1].verdict == "not needed"


def test_subsets_use_best_with_vs_best_without_and_untestable_materials():
    models = [_m(("silica",), 1.0), _m(("silica", "ice"), 6.0), _m(("silica", "carbon"), 0.5)]
    v = {x.material: x for x in material_verdicts(models, MATS, full_name=None)}
    assert v["ice"].pairing == "best with vs best without"
    assert v["ice"].ln_b == pytest.approx(5.0) and v["ice"].verdict == "needed"
    assert v["carbon"].ln_b == pytest.approx(0.5 - 6.0) and v["carbon"].verdict == "not needed"
    assert v["silica"].verdict == "not tested"
    assert "not tested" in v["silica"].sentence()


def test_ranking_table():
    models = [_m(MATS, 10.0, 0.2), _m(("silica", "carbon"), 2.0, 0.3), _m(("silica", "ice"), 11.5, 0.1)]
    t = rank_models(models, full_name="silica+ice+carbon")
    assert list(t["model"]) == ["silica+ice", "silica+ice+carbon", "silica+carbon"]
    assert t["ln_b_best"][1] == pytest.approx(-1.5)
    assert t["ln_b_best_err"][1] == pytest.approx(math.hypot(0.2, 0.1))
    assert t["ln_b_full"][0] == pytest.approx(1.5) and t["ln_b_full"][1] == 0.0
    assert t["strength_vs_best"][0] == "best" and t["strength_vs_best"][2] == "overwhelming"
    assert np.sum(t["posterior_probability"]) == pytest.approx(1.0)
    assert "needed" in VERDICT_RULE and "2 sigma" in VERDICT_RULE


def test_posterior_summary_quantiles(rng):
    x = rng.normal(size=(200000, 2)) * [1.0, 2.0] + [0.0, 5.0]
    t = summarise_posterior(x, ["a", "b"])
    # normal quantiles: 16/84% at -+0.9945 sd, 2.5/97.5% at -+1.96 sd, 95% at 1.645 sd
    assert t["lo68"][0] == pytest.approx(-0.9945, abs=0.02)
    assert t["hi95"][1] == pytest.approx(5 + 2 * 1.96, abs=0.04)
    assert t["upper95"][0] == pytest.approx(1.645, abs=0.02)


def test_model_sets():
    each = build_model_set("each-removed", MATS)
    assert [m.name for m in each] == ["silica+ice+carbon", "ice+carbon", "silica+carbon", "silica+ice"]
    subsets = build_model_set("all-subsets", MATS, keep=("silica",))
    assert len(subsets) == 4 and all("silica" in m.materials for m in subsets)
    assert len(build_model_set("all-subsets", MATS)) == 7
    listed = build_model_set("list", MATS, explicit=[["ice", "silica"], ["silica"]])
    assert listed[0].materials == ("silica", "ice")          # description order
    with pytest.raises(FitError, match="empty"):
        build_model_set("list", MATS, explicit=[])
    with pytest.raises(FitError, match="unknown material"):
        build_model_set("list", MATS, explicit=[["iron"]])
    with pytest.raises(FitError, match="set must be one of"):
        build_model_set("everything", MATS)


def test_best_fit_contrasts_split_ln_b_into_best_fit_and_occam_parts():
    from types import SimpleNamespace

    from motes.dust.fit.evidence import best_fit_contrasts

    def model(name, mats, ln_z, ln_l, chi2):
        return SimpleNamespace(name=name, materials=mats, ln_z=ln_z, ln_z_err=0.3, best_ln_l=ln_l, best_chi2=chi2)

    full = model("a+b", ("a", "b"), 89.07, 108.87, 3.88)
    without_b = model("a", ("a",), 89.32, 107.27, 7.09)
    verdicts = material_verdicts([ModelEvidence(m.name, m.materials, m.ln_z, m.ln_z_err) for m in (full, without_b)],
                                 ["a", "b"], "a+b")
    (c,) = best_fit_contrasts(verdicts, [full, without_b])     # "a" is in every model: not tested, no line
    assert c.material == "b"
    assert c.delta_chi2 == pytest.approx(7.09 - 3.88)
    assert c.delta_ln_l_max == pytest.approx(1.60)
    assert c.occam == pytest.approx((89.07 - 108.87) - (89.32 - 107.27))
    assert c.delta_ln_l_max + c.occam == pytest.approx(c.ln_b) and c.ln_b == pytest.approx(verdicts[1].ln_b)
    assert "+3.21" in c.sentence() and "ln B = -0.25" in c.sentence()
