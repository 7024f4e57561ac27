"""Paired statistics against the libraries and tables they come from."""

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from shiftbench.statistics import (
    compare_paired, corrected_t, critical_difference, holm, nemenyi_critical_value, rank_test, units_to_decide,
)

CANDIDATE = np.array([0.91, 0.93, 0.90, 0.95, 0.92, 0.94, 0.89, 0.93, 0.92, 0.96])
REFERENCE = np.array([0.88, 0.90, 0.91, 0.90, 0.89, 0.92, 0.87, 0.90, 0.91, 0.91])


def test_paired_t_and_wilcoxon_p_values_are_scipys():
    # scipy.stats.ttest_rel and scipy.stats.wilcoxon on the same pairs (scipy documentation).
    result = compare_paired(CANDIDATE, REFERENCE, rope=0.01, folds=10)
    assert result.t_p == pytest.approx(stats.ttest_rel(CANDIDATE, REFERENCE).pvalue)
    assert result.wilcoxon_p == pytest.approx(stats.wilcoxon(CANDIDATE - REFERENCE).pvalue)


def test_the_plain_interval_is_the_student_t_interval_of_the_mean_difference():
    # mean +- t_{0.975, n-1} s / sqrt(n) (common practice, no source), computed here by hand.
    differences = CANDIDATE - REFERENCE
    half = stats.t.ppf(0.975, len(differences) - 1) * differences.std(ddof=1) / np.sqrt(len(differences))
    result = compare_paired(CANDIDATE, REFERENCE, rope=0.01, folds=10)
    assert (result.plain_low, result.plain_high) == pytest.approx((differences.mean() - half, differences.mean() + half))


# Ten paired differences (5 random splits x 2 seeds, 160 test and 480 training samples) from an
# earlier demo study, graph_conv minus qda.
WORKED = np.array([0.0625, 0.0625, 0.05625, 0.04375, -0.00625, -0.00625, 0.0875, 0.06875, 0.0, 0.0375])


def test_the_corrected_t_reproduces_a_hand_computed_worked_example():
    # Nadeau & Bengio 2003, corrected resampled t: variance s^2 (1/J + n_test/n_train), J - 1 = 9
    # degrees of freedom. By hand: mean 0.040625, s^2 = 0.00113932, (1/10 + 160/480) s^2 =
    # 0.00049371, scale 0.022220, t = 1.8283, t_{0.975, 9} = 2.262157: interval -0.009639 to
    # 0.090889, two-sided p = 0.1008 (the plain paired t on the same runs: 0.016 to 0.065).
    result = corrected_t(WORKED, 160 / 480)
    assert result.mean == pytest.approx(0.040625)
    assert result.scale == pytest.approx(0.022220, abs=1e-6)
    assert (result.low, result.high) == pytest.approx((-0.009639, 0.090889), abs=1e-6)
    assert result.p == pytest.approx(0.1008, abs=1e-4) and result.degrees_of_freedom == 9


def test_seeds_averaged_per_split_widen_the_worked_example_further():
    # The same ten runs with the two seeds of each split averaged: J = 5 units, 4 degrees of
    # freedom; by hand -0.0285 to 0.1097, p = 0.178.
    result = corrected_t(WORKED.reshape(5, 2).mean(axis=1), 160 / 480)
    assert (result.low, result.high, result.p) == pytest.approx((-0.0285, 0.1097, 0.178), abs=1e-3)


def test_the_corrected_variance_and_bayesian_probabilities_are_baycomps_correlated_t_test():
    # baycomp's CorrelatedTTest (Corani & Benavoli 2015): the posterior of the mean difference is
    # Student t with n - 1 degrees of freedom and the Nadeau-Bengio variance of K-fold (rho = 1/K).
    from baycomp.single import CorrelatedTTest

    rng = np.random.default_rng(3)
    candidate = 0.9 + rng.normal(0, 0.02, 10)
    reference = candidate - 0.02 + rng.normal(0, 0.02, 10)
    result = compare_paired(candidate, reference, rope=0.01, folds=5, repetitions=2)
    mean, variance, freedom = CorrelatedTTest.compute_statistics(reference, candidate, runs=2)
    assert result.mean == pytest.approx(mean) and result.degrees_of_freedom == freedom
    assert corrected_t(candidate - reference, 1 / 4).scale == pytest.approx(np.sqrt(variance))
    posterior = stats.t(freedom, loc=mean, scale=np.sqrt(variance))
    assert result.p_better == pytest.approx(posterior.sf(0.01))
    assert result.p_worse == pytest.approx(posterior.cdf(-0.01))
    assert result.p_better + result.p_equivalent + result.p_worse == pytest.approx(1)


@pytest.mark.parametrize(("differences", "reason"), [(np.array([0.05, 0.06]), "2 units"),
                                                      (np.full(5, 0.03), "identical differences")])
def test_too_few_or_identical_units_decide_nothing(differences, reason):
    result = compare_paired(0.8 + differences, np.full(len(differences), 0.8), rope=0.01, folds=5)
    assert reason in result.degenerate and np.isnan(result.p) and np.isnan(result.low)


def test_units_to_decide_grow_with_the_spread_and_vanish_under_the_corrections_floor():
    # With K = 5 the corrected variance never falls below s^2 / 4: a mean 0.03 above the ROPE's
    # edge needs s below about 0.03; at s = 0.02 some repetitions decide it, at s = 0.05 none do.
    rng = np.random.default_rng(0)
    noise = rng.standard_normal(5)
    noise = (noise - noise.mean()) / noise.std(ddof=1)
    assert units_to_decide(0.04 + 0.01 * noise, 0.01, 5, 1) == 5
    needed = units_to_decide(0.04 + 0.02 * noise, 0.01, 5, 1)
    assert needed is not None and needed > 5 and needed % 5 == 0
    assert units_to_decide(0.04 + 0.05 * noise, 0.01, 5, 1) is None


def test_rope_shares_count_units_below_inside_and_above():
    result = compare_paired(np.array([0.5, 0.5, 0.5, 0.5]), np.array([0.48, 0.5, 0.505, 0.6]), rope=0.01, folds=4)
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
