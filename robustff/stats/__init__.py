"""Statistics of Monte Carlo results: percentiles with intervals, harm probability, convergence.

Pure functions on arrays (samples along axis 0); no file I/O. ``scipy.special`` is imported inside
the functions that need it, so importing this package costs only numpy.

Modules
-------
* :mod:`~robustff.stats.percentiles`: percentiles with order-statistic intervals, metric
  summaries, paired comparison of the two arms.
* :mod:`~robustff.stats.harm`: probability that feedforward is worse, Wilson and
  Clopper-Pearson intervals.
* :mod:`~robustff.stats.convergence`: whether the sample count was enough.
* :mod:`~robustff.stats.histograms`: ratio histograms, envelopes from per-time histograms.

Conventions
-----------
* A sample whose metric is NaN or +-inf is *unstable* (the closed loop diverged). Summaries exclude
  such samples and report how many they used; :func:`probability_worse` counts a sample unstable
  only with feedforward as "feedforward worse" (see there).
* Percentile estimates use ``numpy.percentile(method="linear")``. Their confidence intervals are
  distribution-free: ``[X_(r), X_(s)]`` from order statistics, whose coverage for the true
  p-quantile is ``P(r <= B <= s - 1)`` with ``B ~ Binomial(n, p)`` for any continuous distribution
  (Source: David and Nagaraja, Order Statistics, 3rd ed. 2003, section 7.1 [from memory]).
"""

from __future__ import annotations

from robustff.stats.convergence import (
    ConvergenceCheck,
    convergence_check,
    convergence_for_percentile,
    convergence_for_probability,
    samples_for_probability,
    zero_failure_bound,
)
from robustff.stats.harm import (
    HarmEstimate,
    clopper_pearson_interval,
    probability_worse,
    wilson_interval,
)
from robustff.stats.histograms import envelope_from_histogram, ratio_histogram
from robustff.stats.percentiles import (
    DEFAULT_PERCENTILES,
    MetricSummary,
    PercentileEstimate,
    metric_ratio,
    order_statistic_coverage,
    order_statistic_interval,
    paired_comparison,
    percentile_key,
    percentile_table,
    summarize,
)

__all__ = [
    "DEFAULT_PERCENTILES",
    "PercentileEstimate",
    "MetricSummary",
    "HarmEstimate",
    "ConvergenceCheck",
    "percentile_key",
    "order_statistic_coverage",
    "order_statistic_interval",
    "percentile_table",
    "summarize",
    "paired_comparison",
    "metric_ratio",
    "wilson_interval",
    "clopper_pearson_interval",
    "probability_worse",
    "samples_for_probability",
    "zero_failure_bound",
    "convergence_for_probability",
    "convergence_for_percentile",
    "convergence_check",
    "ratio_histogram",
    "envelope_from_histogram",
]
