"""Verification measures against a textbook table computed by hand, and published properties of the scores.

Source of the formulas: Wilks (2011), Statistical Methods in the Atmospheric Sciences, 3rd ed., chapter 8; Gerrity
(1992), Mon. Wea. Rev. 120; Murphy (1973), J. Appl. Meteor. 12 (the Brier-score decomposition).
"""

import numpy as np
import pytest
from numpy.testing import assert_allclose

from icing.verify.scores import (
    ContingencyTable,
    brier_score,
    contingency_table,
    gerrity_weights,
    multicategory_scores,
    multicategory_table,
    reliability_table,
)

# Finley's (1884) tornado forecasts, the classic 2x2 example of the verification texts (Wilks 2011, section 8.2;
# Jolliffe and Stephenson 2012, chapter 3): hits, false alarms, misses, correct negatives (from memory).
FINLEY = {"a": 28, "b": 72, "c": 23, "d": 2680}


def test_finley_measures_by_hand():
    """POD, FAR, CSI, TSS, bias, HSS and proportion correct of the Finley table, recomputed by hand from the
    definitions, and the rounded values the texts quote (POD 0.549, FAR 0.720, CSI 0.228, TSS 0.523; from memory)."""
    a, b, c, d = FINLEY.values()
    t = ContingencyTable(**FINLEY)
    n = a + b + c + d
    assert t.n == 2803 == n
    assert_allclose(t.pod, 28 / 51, rtol=1e-12)
    assert_allclose(t.far, 72 / 100, rtol=1e-12)
    assert_allclose(t.csi, 28 / 123, rtol=1e-12)
    assert_allclose(t.pofd, 72 / 2752, rtol=1e-12)
    assert_allclose(t.tss, 28 / 51 - 72 / 2752, rtol=1e-12)
    assert_allclose(t.bias, 100 / 51, rtol=1e-12)
    assert_allclose(t.proportion_correct, 2708 / 2803, rtol=1e-12)
    assert_allclose(t.hss, 2 * (28 * 2680 - 72 * 23) / (51 * 2703 + 100 * 2752), rtol=1e-12)
    # the values quoted in the texts, to their three decimals (from memory)
    assert_allclose([t.pod, t.far, t.csi, t.tss], [0.549, 0.720, 0.228, 0.523], atol=5e-4)
    assert_allclose(t.proportion_correct, 0.966, atol=5e-4)  # Finley's own claim of 96.6 % (from memory)


def test_table_from_pairs_and_missing_pairs_left_out():
    """The Finley table rebuilt from 2803 pairs (plus pairs with a missing value, which are not counted)."""
    obs = [True] * 28 + [False] * 72 + [True] * 23 + [False] * 2680 + [None, True]
    fc = [True] * 28 + [True] * 72 + [False] * 23 + [False] * 2680 + [True, None]
    assert contingency_table(obs, fc) == ContingencyTable(**FINLEY)


def test_undefined_measures_are_nan_not_zero():
    """No event observed and none forecast: POD, FAR, CSI, bias undefined (NaN, never 0)."""
    t = ContingencyTable(0, 0, 0, 10)
    assert np.isnan(t.pod) and np.isnan(t.far) and np.isnan(t.csi) and np.isnan(t.bias) and np.isnan(t.tss)
    assert t.pofd == 0.0 and t.proportion_correct == 1.0
    e = ContingencyTable(0, 0, 0, 0)
    assert all(np.isnan(v) for k, v in e.scores().items() if k not in ("hits", "false_alarms", "misses",
                                                                        "correct_negatives", "n"))
    with pytest.raises(ValueError):
        ContingencyTable(-1, 0, 0, 0)


def test_two_category_table_reduces_to_the_2x2_measures():
    """For K = 2 the multi-category Peirce and Gerrity scores equal the true skill statistic and the Heidke score
    equals the 2x2 HSS (Gerrity 1992; Wilks 2011, section 8.3), on the Finley table."""
    a, b, c, d = FINLEY.values()
    m = multicategory_scores(np.array([[a, b], [c, d]]))
    t = ContingencyTable(**FINLEY)
    assert_allclose([m["pss"], m["gerrity"], m["hss"]], [t.tss, t.tss, t.hss], rtol=1e-12)
    assert_allclose(m["proportion_correct"], t.proportion_correct, rtol=1e-12)


def test_gerrity_weights_by_hand():
    """Three classes observed with frequencies 1/2, 1/4, 1/4: a1 = 1, a2 = 1/3, so by Gerrity's (1992) formulas
    s11 = (a1 + a2)/2 = 2/3, s22 = (1/a1 + a2)/2 = 2/3, s33 = (1/a1 + 1/a2)/2 = 2, s12 = (a2 - 1)/2 = -1/3,
    s13 = -2/2 = -1, s23 = (1/a1 - 1)/2 = 0 (computed by hand)."""
    s = gerrity_weights([0.5, 0.25, 0.25])
    want = np.array([[2 / 3, -1 / 3, -1.0], [-1 / 3, 2 / 3, 0.0], [-1.0, 0.0, 2.0]])
    assert_allclose(s, want, rtol=1e-12, atol=1e-15)


@pytest.mark.parametrize("p", [[0.7, 0.2, 0.05, 0.05], [0.25, 0.25, 0.25, 0.25], [0.6, 0.1, 0.1, 0.1, 0.1]])
def test_gerrity_is_equitable(p):
    """Equitable (Gerrity 1992): a constant forecast of any class, and random forecasts, score 0 in expectation:
    each row of the weights averaged over the observed frequencies is 0; a perfect forecast scores 1."""
    p = np.asarray(p)
    s = gerrity_weights(p)
    assert_allclose(s @ p, 0.0, atol=1e-12)
    assert_allclose(np.sum(p * np.diag(s)), 1.0, rtol=1e-12)  # perfect forecasts: GS = sum p_i s_ii = 1


def test_perfect_and_undefined_multicategory():
    perfect = multicategory_scores(np.diag([5, 3, 2]))
    assert_allclose([perfect[k] for k in ("proportion_correct", "hss", "pss", "gerrity")], 1.0, rtol=1e-12)
    empty = multicategory_scores(np.zeros((3, 3)))
    assert np.isnan(empty["hss"]) and np.isnan(empty["gerrity"])
    # a class at an end never observed: Gerrity's a_i is 0 there, so the score is undefined (NaN), not 0
    assert np.isnan(multicategory_scores(np.array([[3, 1, 0], [1, 2, 0], [0, 1, 0]]))["gerrity"])


def test_multicategory_table_orientation():
    """Rows are the forecast class, columns the observed one (Wilks 2011, section 8.3)."""
    t = multicategory_table(["none", "light", None], ["light", "light", "severe"], ["none", "light", "severe"])
    assert t.loc["light", "none"] == 1 and t.loc["light", "light"] == 1 and t.to_numpy().sum() == 2
    with pytest.raises(ValueError):
        multicategory_table(["icy"], ["none"], ["none", "light"])


def test_reliability_and_brier_decomposition_by_hand():
    """Ten forecasts of 0.1 with one event and ten of 0.9 with eight: observed frequencies 0.1 and 0.8;
    by hand BS = (0.81 + 9*0.01 + 8*0.01 + 2*0.81)/20 = 0.13, REL = 10*(0.9-0.8)^2/20 = 0.005,
    RES = 10*(0.35^2 + 0.35^2)/20 = 0.1225, UNC = 0.45*0.55 = 0.2475; BS = REL - RES + UNC (Murphy 1973)."""
    p = [0.1] * 10 + [0.9] * 10
    o = [True] + [False] * 9 + [True] * 8 + [False] * 2
    t = reliability_table(p, o, bins=10)
    assert len(t) == 10 and t["count"].sum() == 20
    used = t[t["count"] > 0]
    assert_allclose(used["mean_probability"], [0.1, 0.9], rtol=1e-12)
    assert_allclose(used["observed_frequency"], [0.1, 0.8], rtol=1e-12)
    assert t.loc[t["count"] == 0, "observed_frequency"].isna().all()  # empty bins are unknown, not 0
    a = t.attrs
    assert_allclose([a["brier"], a["reliability"], a["resolution"], a["uncertainty"]], [0.13, 0.005, 0.1225, 0.2475],
                    rtol=1e-12)
    assert_allclose(a["brier"], a["reliability"] - a["resolution"] + a["uncertainty"], rtol=1e-12)
    assert_allclose(brier_score(p, o), 0.13, rtol=1e-12)
    with pytest.raises(ValueError):
        reliability_table([1.2], [True])
