"""Borderline verdicts: a verdict whose statistic is within the seed-to-seed scatter of its threshold is flagged.

The rule (motes.dust.fit.evidence): with sigma the quoted error of ln B, the
statistic is ln B - 2 sigma ("needed", threshold 3), ln B + 2 sigma ("not
needed", threshold -1), the nearer of the two for "undecided"; the verdict is
borderline when the statistic is closer to its threshold than
SEED_SCATTER_FACTOR * sigma. The verdict itself never changes.
"""

from __future__ import annotations

import math

import pytest

from motes.dust.fit.evidence import SEED_SCATTER_FACTOR, VERDICT_RULE, ModelEvidence, material_verdicts

ERR = 0.2 / math.sqrt(2)           # per model: sigma of ln B = 0.2, seed scatter 1.1 * 0.2 = 0.22


def _verdict(ln_b):
    full = ModelEvidence("a+b", ("a", "b"), 10.0, ERR)
    without_b = ModelEvidence("a", ("a",), 10.0 - ln_b, ERR)
    return material_verdicts([full, without_b], ("a", "b"), full_name="a+b")[1]


@pytest.mark.parametrize("ln_b, verdict, borderline", [
    (3.5, "needed", True),          # ln B - 2 sigma = 3.1: 0.1 above the threshold, scatter 0.22
    (5.0, "needed", False),         # 4.6: 1.6 above
    (-1.5, "not needed", True),     # ln B + 2 sigma = -1.1: 0.1 below -1
    (-3.0, "not needed", False),    # -2.6: 1.6 below
    (3.2, "undecided", True),       # ln B - 2 sigma = 2.8: 0.2 short of "needed"
    (2.0, "undecided", False),      # 1.6 short of "needed", 3.4 from "not needed"
    (-1.2, "undecided", True),      # ln B + 2 sigma = -0.8: 0.2 short of "not needed"
    (-0.9, "undecided", False),     # -0.5: 0.5 short of "not needed"
])
def test_borderline_flag_follows_the_rule(ln_b, verdict, borderline):
    v = _verdict(ln_b)
    assert v.ln_b_err == pytest.approx(0.2)
    assert v.verdict == verdict
    lo, hi = ln_b - 2 * v.ln_b_err, ln_b + 2 * v.ln_b_err
    margin = {"needed": lo - 3.0, "not needed": -1.0 - hi}.get(verdict, min(3.0 - lo, hi + 1.0))
    assert v.borderline == (margin < SEED_SCATTER_FACTOR * v.ln_b_err) == borderline
    assert ("borderline" in v.sentence()) == borderline


def test_borderline_sentence_reports_the_scatter():
    v = _verdict(3.5)
    assert "borderline" in v.sentence() and f"±{SEED_SCATTER_FACTOR * 0.2:.2f}" in v.sentence()
    assert v.sentence().startswith("b: needed (ln B = +3.50 ± 0.20")
    assert "borderline" in VERDICT_RULE and "1.1 sigma" in VERDICT_RULE


def test_exact_evidences_are_never_borderline_away_from_the_thresholds():
    full = ModelEvidence("a+b", ("a", "b"), 10.0, 0.0)
    for ln_b in (3.01, 2.99, -0.99, -1.01, 8.0):
        v = material_verdicts([full, ModelEvidence("a", ("a",), 10.0 - ln_b, 0.0)], ("a", "b"), "a+b")[1]
        assert not v.borderline
