"""Paired statistics against the libraries and tables they come from."""

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from shiftbench.statistics import compare_paired, critical_difference, holm, nemenyi_critical_value, rank_test

CANDIDATE = np.array([0.91, 0.93, 0.90, 0.95, 0.92, 0.94, 0.89, 0.93, 0.92, 0.96])
REFERENCE = np.array([0.88, 0.90, 0.91, 0.90, 0.89, 0.92, 0.87, 0.90, 0.91, 0.91])


def test_paired_t_and_wilcoxon_p_values_are_scipys():
    # scipy.stats.ttest_rel and scipy.stats.wilcoxon on the same pairs (scipy documentation).
    result = compare_paired(CANDIDATE, REFERENCE, rope=0.01)
    assert result.t_p == pytest.approx(stats.ttest_rel(CANDIDATE, REFERENCE).pvalue)
    assert result.wilcoxon_p == pytest.approx(stats.wilcoxon(CANDIDATE - REFERENCE).pvalue)


def test_the_interval_is_the_student_t_interval_of_the_mean_difference():
    # mean +- t_{0.975, n-1} s / sqrt(n) (common practice, no source), computed here by hand.
    differences = CANDIDATE - REFERENCE
    half = stats.t.ppf(0.975, len(differences) - 1) * differences.std(ddof=1) / np.sqrt(len(differences))
    result = compare_paired(CANDIDATE, REFERENCE, rope=0.01)
    assert (result.low, result.high) == pytest.approx((differences.mean() - half, differences.mean() + half))


def test_rope_shares_count_units_below_inside_and_above():
    result = compare_paired(np.array([0.5, 0.5, 0.5, 0.5]), np.array([0.48, 0.5, 0.505, 0.6]), rope=0.01)
    assert (result.below, result.inside, result.above) == (0.25, 0.5, 0.25)


def test_holm_matches_statsmodels_and_a_worked_example():
    # Holm (1979): sorted p (0.01, 0.02, 0.03) times (3, 2, 1), made monotone: 0.03, 0.04, 0.04.
    assert holm([0.02, 0.01, 0.03]) == pytest.approx([0.04, 0.03, 0.04])
    assert np.isnan(holm([float("nan"), 0.01])[0])


@pytest.mark.parametrize(("candidates", "q"), [(2, 1.960), (3, 2.343), (4, 2.569), (5, 2.728), (6, 2.850)])
def test_nemenyi_critical_values_match_demsar_table_5(candidates, q):
    # Demsar 2006, Table 5(a), q_0.05 (from memory).
    assert nemenyi_critical_value(candidates) == pytest.approx(q, abs=0.001)


def test_critical_difference_follows_demsars_formula():
    # CD = q_alpha sqrt(k (k + 1) / (6 N)) (Demsar 2006, section 3.2.2): k = 4, N = 14 gives 1.25.
    assert critical_difference(4, 14) == pytest.approx(2.569 * np.sqrt(4 * 5 / (6 * 14)), abs=1e-3)


def test_friedman_p_is_scipys_and_ranks_put_the_best_first():
    rng = np.random.default_rng(0)
    scores = pd.DataFrame(rng.random((8, 3)) * 0.1 + [0.9, 0.8, 0.7], columns=["a", "b", "c"])
    test = rank_test(scores)
    assert test.friedman_p == pytest.approx(stats.friedmanchisquare(scores["a"], scores["b"], scores["c"]).pvalue)
    assert list(test.ranks.sort_values().index) == ["a", "b", "c"] and test.ranks["a"] == 1.0
    assert test.nemenyi.loc["a", "c"] < 0.05
