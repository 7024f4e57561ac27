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


@dataclass(frozen=True)
class PairedComparison:
    """A candidate against a reference over paired units (same split and seed).

    Attributes:
        differences: candidate minus reference, one per unit.
        mean, low, high: the mean difference and its Student t interval (``CONFIDENCE``).
        t_p, wilcoxon_p: two-sided p-values of the paired t-test and the signed-rank test.
        below, inside, above: shares of units whose difference is below ``-rope``, within
            ``[-rope, rope]``, above ``rope``.
    """

    differences: tuple[float, ...]
    mean: float
    low: float
    high: float
    t_p: float
    wilcoxon_p: float
    below: float
    inside: float
    above: float

    def as_dict(self) -> dict:
        return asdict(self)


def compare_paired(candidate: np.ndarray, reference: np.ndarray, rope: float) -> PairedComparison:
    """Compare two ``(units,)`` arrays of paired figures.

    ``mean +- t_{0.975, n-1} s / sqrt(n)`` for the interval; when every difference is equal the
    interval is that value and both p-values are 1 if it is 0, else 0 for the t-test (no spread)
    and the signed-rank test's own value."""
    differences = np.asarray(candidate, dtype=float) - np.asarray(reference, dtype=float)
    count = len(differences)
    mean = float(differences.mean())
    spread = float(differences.std(ddof=1)) if count > 1 else float("nan")
    if count < 2:
        low = high = t_p = wilcoxon_p = float("nan")
    elif spread < 1e-12:  # equal differences (up to rounding): no spread to test against
        low = high = mean
        t_p = 1.0 if mean == 0 else 0.0
        wilcoxon_p = 1.0 if mean == 0 else float(stats.wilcoxon(differences).pvalue)
    else:
        low, high = (float(x) for x in stats.t.interval(CONFIDENCE, count - 1, loc=mean, scale=spread / np.sqrt(count)))
        t_p = float(stats.ttest_rel(candidate, reference).pvalue)
        nonzero = differences[differences != 0]
        wilcoxon_p = float(stats.wilcoxon(differences).pvalue) if len(nonzero) else 1.0
    return PairedComparison(
        differences=tuple(float(x) for x in differences),
        mean=mean, low=low, high=high, t_p=t_p, wilcoxon_p=wilcoxon_p,
        below=float((differences < -rope).mean()),
        inside=float((np.abs(differences) <= rope).mean()),
        above=float((differences > rope).mean()),
    )


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
