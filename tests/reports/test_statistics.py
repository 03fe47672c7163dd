"""Study statistics agree with scipy.stats on the same numbers."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from boundsvc.reports import StudyRow, pearson_log, spearman, spearman_fisher_ci, study_statistics

BOUNDS = [0.011, 0.034, 0.09, 0.31, 0.95, 2.7, 8.1]
ERRORS = [0.0009, 0.0021, 0.017, 0.0098, 0.081, 0.66, 0.12]  # two pairs out of order


def test_pearson_is_scipys_on_log_values() -> None:
    res = pearson_log(BOUNDS, ERRORS, 0.95)
    ref = stats.pearsonr(np.log10(BOUNDS), np.log10(ERRORS))
    ci = ref.confidence_interval(confidence_level=0.95)
    assert res["r"] == pytest.approx(ref.statistic, rel=1e-12)
    assert res["p_value"] == pytest.approx(ref.pvalue, rel=1e-9)
    assert res["ci"] == pytest.approx([ci.low, ci.high], rel=1e-12)
    assert res["on"] == "log10 values"


def test_spearman_is_scipys_with_the_fieller_interval() -> None:
    """Fieller, Hartley & Pearson (1957): var(atanh(rho)) ~ 1.06/(n-3)."""
    res = spearman(np.log10(BOUNDS).tolist(), np.log10(ERRORS).tolist(), 0.90)
    ref = stats.spearmanr(BOUNDS, ERRORS)  # ranks: the log changes nothing
    assert res["rho"] == pytest.approx(ref.statistic, rel=1e-12)
    assert res["p_value"] == pytest.approx(ref.pvalue, rel=1e-9)
    n = len(BOUNDS)
    half = stats.norm.ppf(0.95) * math.sqrt(1.06 / (n - 3))
    z = math.atanh(ref.statistic)
    assert res["ci"] == pytest.approx([math.tanh(z - half), math.tanh(z + half)], rel=1e-12)


def test_interval_of_a_perfect_rank_correlation_is_degenerate_not_an_error() -> None:
    assert spearman_fisher_ci(1.0, 5, 0.95) == (1.0, 1.0)
    with pytest.raises(ValueError, match="n must be >= 4"):
        spearman_fisher_ci(0.5, 3, 0.95)


def test_effectivity_summary_and_exclusions() -> None:
    rows = [StudyRow(f"c{i}", b, e) for i, (b, e) in enumerate(zip(BOUNDS, ERRORS, strict=True))]
    rows.append(StudyRow("vacuous", None, 0.1))  # no finite bound: left out
    out = study_statistics(rows)
    eff = np.array(BOUNDS) / np.array(ERRORS)
    q1, q3 = np.percentile(eff, [25, 75])
    assert out["paired"] == len(BOUNDS)
    assert out["effectivity"]["median"] == pytest.approx(np.median(eff))
    assert out["effectivity"]["min"] == pytest.approx(eff.min())
    assert out["effectivity"]["max"] == pytest.approx(eff.max())
    assert out["effectivity"]["iqr"] == pytest.approx(q3 - q1)
    assert out["effectivity"]["all_at_least_one"] is True


def test_too_few_or_constant_values_give_a_reason_not_a_warning() -> None:
    few = pearson_log([0.1, 0.2], [0.01, 0.03], 0.95)
    assert few["r"] is None and "at least 3" in few["reason"]
    flat = spearman([1.0, 1.0, 1.0, 1.0], [1.0, 2.0, 3.0, 4.0], 0.95)
    assert flat["rho"] is None and "constant" in flat["reason"]
    three = pearson_log([0.1, 0.2, 0.5], [0.01, 0.03, 0.04], 0.95)
    assert three["r"] is not None and three["ci"] is None  # an interval needs n >= 4


def test_parameter_trend() -> None:
    rows = [
        StudyRow("a", 0.3, parameter=3.0),
        StudyRow("b", 0.1, parameter=1.0),
        StudyRow("c", 0.2, parameter=2.0),
        StudyRow("d", 0.4, parameter=4.0),
    ]
    trend = study_statistics(rows, parameter_name="eps")["parameter_trend"]
    assert trend["bound"] == "increasing"
    assert trend["spearman_bound"]["rho"] == pytest.approx(1.0)
    rows[0] = StudyRow("a", 0.05, parameter=3.0)
    assert study_statistics(rows, parameter_name="eps")["parameter_trend"]["bound"] == (
        "not monotone"
    )


def test_confidence_level_is_checked() -> None:
    with pytest.raises(ValueError, match=r"confidence must be in \(0, 1\)"):
        study_statistics([], confidence=1.0)
