"""Paired comparisons of candidates, from kept libraries: scipy.stats for the paired t-test, the
Wilcoxon signed-rank test and the Friedman test, statsmodels for Holm's correction,
scikit-posthocs for the Nemenyi post-hoc test (Demšar 2006, "Statistical comparisons of classifiers
over multiple data sets")."""

from __future__ import annotations

from dataclasses import asdict, dataclass

import numpy as np
import pandas as pd
import scikit_posthocs
from scipy import stats
from statsmodels.stats.multitest import multipletests

CONFIDENCE = 0.95


# Fewer paired units than this, or differences with no spread, decide nothing.
FEWEST_UNITS = 3


@dataclass(frozen=True)
class CorrectedT:
    """The corrected resampled t-test of a mean difference (Nadeau & Bengio 2003, "Inference for
    the generalization error"; for repeated K-fold cross-validation Bouckaert & Frank 2004):

    ``t = mean / sqrt((1/J + n_test/n_train) s^2)`` with ``J - 1`` degrees of freedom, where
    ``J`` is the number of units and ``s`` their standard deviation. Resampled units share
    training samples, so their spread underestimates the variance; the ``n_test/n_train`` term
    restores it (the plain paired t-test has only ``1/J``)."""

    mean: float
    low: float
    high: float
    p: float
    degrees_of_freedom: int
    scale: float


def corrected_t(differences: np.ndarray, test_ratio: float, confidence: float = CONFIDENCE) -> CorrectedT:
    """:class:`CorrectedT` of ``(units,)`` differences; ``test_ratio`` is ``n_test / n_train``
    (``1 / (K - 1)`` for K-fold). Needs two units and some spread (else NaN figures)."""
    differences = np.asarray(differences, dtype=float)
    count = len(differences)
    mean = float(differences.mean())
    spread = float(differences.std(ddof=1)) if count > 1 else 0.0
    if count < 2 or spread < 1e-12:
        return CorrectedT(mean, float("nan"), float("nan"), float("nan"), max(count - 1, 0), float("nan"))
    scale = spread * float(np.sqrt(1 / count + test_ratio))
    low, high = (float(x) for x in stats.t.interval(confidence, count - 1, loc=mean, scale=scale))
    p = float(2 * stats.t.sf(abs(mean) / scale, count - 1))
    return CorrectedT(mean, low, high, p, count - 1, scale)


@dataclass(frozen=True)
class PairedComparison:
    """A candidate against a reference over paired units (the same outer folds).

    Attributes:
        differences: candidate minus reference, one per unit (larger is better).
        mean, low, high, p: the mean difference, its corrected interval (``CONFIDENCE``) and
            the corrected t-test's two-sided p (:func:`corrected_t`).
        degrees_of_freedom: units minus one.
        test_ratio: ``n_test / n_train`` of the correction (``1 / (folds - 1)``).
        plain_low, plain_high, t_p: the plain paired t interval and p (secondary: too narrow
            on resampled units), wilcoxon_p: the signed-rank test's p (secondary).
        p_better, p_equivalent, p_worse: the Bayesian correlated t-test's posterior
            probabilities (Corani & Benavoli 2015; Benavoli et al. 2017, from ``baycomp``) that
            the difference is above ``rope``, within ``[-rope, rope]``, below ``-rope``.
        below, inside, above: shares of units whose difference is below, within, above the ROPE.
        degenerate: why nothing can be decided (too few units, or identical differences), or None.
    """

    differences: tuple[float, ...]
    mean: float
    low: float
    high: float
    p: float
    degrees_of_freedom: int
    test_ratio: float
    plain_low: float
    plain_high: float
    t_p: float
    wilcoxon_p: float
    p_better: float
    p_equivalent: float
    p_worse: float
    below: float
    inside: float
    above: float
    degenerate: str | None = None

    def as_dict(self) -> dict:
        return asdict(self)


def compare_paired(candidate: np.ndarray, reference: np.ndarray, rope: float, folds: int, repetitions: int = 1) -> PairedComparison:
    """Compare two ``(units,)`` arrays of paired figures (larger is better) from ``repetitions``
    of ``folds``-fold cross-validation: the corrected t (ratio ``1 / (folds - 1)``), baycomp's
    correlated t-test with ``runs=repetitions`` (the same variance and degrees of freedom), and
    the plain paired t and signed-rank tests beside them. With fewer than
    :data:`FEWEST_UNITS` units or no spread every figure but the mean is NaN and
    ``degenerate`` says why."""
    candidate, reference = np.asarray(candidate, dtype=float), np.asarray(reference, dtype=float)
    differences = candidate - reference
    count = len(differences)
    ratio = 1.0 / (folds - 1)
    shares = dict(below=float((differences < -rope).mean()), inside=float((np.abs(differences) <= rope).mean()),
                  above=float((differences > rope).mean()))
    spread = float(differences.std(ddof=1)) if count > 1 else 0.0
    nan = float("nan")
    if count < FEWEST_UNITS or spread < 1e-12:
        reason = f"{count} units" if count < FEWEST_UNITS else "identical differences on every unit"
        return PairedComparison(tuple(map(float, differences)), float(differences.mean()), nan, nan, nan, max(count - 1, 0),
                                ratio, nan, nan, nan, nan, nan, nan, nan, **shares, degenerate=reason)
    import baycomp

    corrected = corrected_t(differences, ratio)
    plain_low, plain_high = (float(x) for x in stats.t.interval(
        CONFIDENCE, count - 1, loc=corrected.mean, scale=spread / np.sqrt(count)))
    better, equivalent, worse = (float(x) for x in baycomp.two_on_single(candidate, reference, rope=rope, runs=repetitions))
    nonzero = differences[differences != 0]
    return PairedComparison(
        differences=tuple(float(x) for x in differences), mean=corrected.mean, low=corrected.low, high=corrected.high,
        p=corrected.p, degrees_of_freedom=corrected.degrees_of_freedom, test_ratio=ratio,
        plain_low=plain_low, plain_high=plain_high, t_p=float(stats.ttest_rel(candidate, reference).pvalue),
        wilcoxon_p=float(stats.wilcoxon(differences).pvalue) if len(nonzero) else 1.0,
        p_better=better, p_equivalent=equivalent, p_worse=worse, **shares,
    )


def units_to_decide(differences: np.ndarray, rope: float, folds: int, repetitions: int, most: int = 100) -> int | None:
    """How many units (``folds`` x repetitions, up to ``most`` repetitions) would decide a
    comparison at the observed mean and spread of ``differences``: the fewest whose corrected
    interval clears the ROPE's edge (``rope``) on the side of the mean. None when no number of
    repetitions would: the correction keeps ``n_test / n_train`` of the variance however many
    repetitions there are, so only more data or more folds can narrow it below that floor."""
    differences = np.asarray(differences, dtype=float)
    mean, spread = float(differences.mean()), float(differences.std(ddof=1))
    distance = abs(mean - rope)
    for count in range(folds * repetitions, folds * most + 1, folds):
        half = float(stats.t.ppf(0.5 + CONFIDENCE / 2, count - 1)) * spread * float(np.sqrt(1 / count + 1 / (folds - 1)))
        if half < distance:
            return count
    return None


def holm(p_values: list[float]) -> list[float]:
    """Holm's step-down adjusted p-values (statsmodels' ``multipletests(method="holm")``);
    NaN stays NaN."""
    values = np.asarray(p_values, dtype=float)
    adjusted = np.full_like(values, np.nan)
    known = ~np.isnan(values)
    if known.any():
        adjusted[known] = multipletests(values[known], method="holm")[1]
    return [float(x) for x in adjusted]


def nemenyi_critical_value(candidates: int, alpha: float = 0.05) -> float:
    """``q_alpha`` of the Nemenyi test: the studentized range quantile over ``sqrt(2)``
    (Demšar 2006, section 3.2.2)."""
    return float(stats.studentized_range.ppf(1 - alpha, candidates, np.inf) / np.sqrt(2))


def critical_difference(candidates: int, datasets: int, alpha: float = 0.05) -> float:
    """``CD = q_alpha sqrt(k (k + 1) / (6 N))``: average ranks further apart than this differ."""
    return nemenyi_critical_value(candidates, alpha) * float(np.sqrt(candidates * (candidates + 1) / (6 * datasets)))


@dataclass(frozen=True)
class RankTest:
    """The Friedman test over datasets and the Nemenyi post-hoc.

    Attributes:
        ranks: average rank of each candidate (1 is best).
        friedman_p: the Friedman test's p-value.
        nemenyi: pairwise p-values, a ``(k, k)`` frame.
        critical_difference: see :func:`critical_difference`.
    """

    ranks: pd.Series
    friedman_p: float
    nemenyi: pd.DataFrame
    critical_difference: float


def rank_test(scores: pd.DataFrame, alpha: float = 0.05) -> RankTest:
    """Friedman and Nemenyi on ``scores``: one row per dataset, one column per candidate, higher
    is better. Needs at least 2 datasets and 3 candidates."""
    ranks = scores.rank(axis=1, ascending=False).mean(axis=0)
    friedman = stats.friedmanchisquare(*(scores[column].to_numpy() for column in scores.columns))
    nemenyi = scikit_posthocs.posthoc_nemenyi_friedman(scores.to_numpy())
    nemenyi.index = nemenyi.columns = list(scores.columns)
    return RankTest(ranks, float(friedman.pvalue), nemenyi, critical_difference(scores.shape[1], scores.shape[0], alpha))


def over_datasets(candidate: np.ndarray, reference: np.ndarray, rope: float, seed: int = 0) -> tuple[float, float, float]:
    """Posterior probabilities that ``candidate`` is better by more than ``rope``, equivalent
    within it, or worse than ``reference``, from two ``(datasets,)`` arrays of mean scores
    (larger is better): the Bayesian signed-rank test (Benavoli et al. 2017, "Time for a change:
    a tutorial for comparing multiple classifiers through Bayesian analysis"; baycomp's
    ``two_on_multiple`` on one score per dataset), with a Dirichlet process prior of strength
    0.5 at zero difference."""
    import baycomp

    better, equivalent, worse = baycomp.two_on_multiple(np.asarray(candidate, dtype=float), np.asarray(reference, dtype=float),
                                                        rope=rope, random_state=seed)
    return float(better), float(equivalent), float(worse)
