"""Intervals over repeats (netsim.report.units.combine_ci95): coverage on cases with a known
answer, and widths that follow the data rather than a t-quantile on one degree of freedom."""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest

from netsim.engine import simulate
from netsim.engine.chain import line_chain
from netsim.engine.metrics import StopRule
from netsim.report.pivot import aggregate
from netsim.report.units import combine_ci95, mean_ci95

Z95 = 1.959963984540054  # two-sided 95 % normal quantile (common practice)


def test_two_repeats_cover_the_true_mean_and_their_width_is_steady() -> None:
    """Two repeats of 200 normal samples (mean 0.8, sd 0.05), each with its normal 95 % interval.
    Combined, the interval should cover 0.8 about 95 % of the time (at least, with the scale
    factor); its width should vary little, while the Student-t interval on the two means (one
    degree of freedom, t = 12.71; Student 1908) swings by a factor of several."""
    rng = np.random.default_rng(2024)
    trials, n, truth = 1500, 200, 0.8
    samples = rng.normal(truth, 0.05, size=(trials, 2, n))
    means = samples.mean(axis=2)
    halves = Z95 * samples.std(axis=2, ddof=1) / math.sqrt(n)
    hits, widths = 0, []
    for m, h in zip(means, halves):
        value, low, high = combine_ci95(list(m), [[mi - hi, mi + hi] for mi, hi in zip(m, h)])
        hits += low <= truth <= high
        widths.append(high - low)
    _, tl, th = mean_ci95(list(means[0]))
    t_widths = np.abs(means[:, 0] - means[:, 1]) * (th - tl) / abs(means[0, 0] - means[0, 1])  # width ~ |m1 - m2|
    coverage = hits / trials
    assert 0.94 <= coverage <= 0.99
    assert np.std(widths) / np.mean(widths) < 0.35
    assert np.std(t_widths) / np.mean(t_widths) > 0.6


def test_combined_rate_interval_of_repeated_runs_covers_the_known_rate() -> None:
    """One perfect hop succeeding with p per period T delivers p / T pairs per second (common
    practice). Three repeats of 150 pairs each, combined as the report combines repeats: the
    interval should miss the known rate in about 5 % of 80 experiments; more than 12 misses has
    probability below 1e-3 (binomial)."""
    p, period = 0.2, 1e-3
    chain = dataclasses.replace(line_chain(1, p, period, herald_s=0.0), min_fidelity=0.5)
    truth = p / period
    misses = 0
    for experiment in range(80):
        records = []
        for repeat in range(3):
            run = simulate([chain], rule=StopRule(pairs=150), seed=1000 * experiment + repeat)[0]
            rate, ci = run.metrics.useful_rate(run.simulated_time_s)
            records.append({"x": 1.0, "rate": rate, "rate_ci95": ci})
        cell = aggregate(records, "rate", ["x"], ci_key="rate_ci95")[(1.0,)]
        misses += not (cell.low <= truth <= cell.high)
    assert misses <= 12


def test_scatter_beyond_the_intervals_widens_the_combined_interval() -> None:
    """Two estimates 10 standard errors apart: the Particle Data Group scale factor
    S = sqrt(chi^2 / (k - 1)) (Review of Particle Physics, averaging procedures) widens the
    interval by S. Here chi^2 = 2 * 5^2 = 50 for k = 2, S = sqrt(50)."""
    value, low, high = combine_ci95([1.0, 2.0], [[1.0 - Z95 * 0.1, 1.0 + Z95 * 0.1], [2.0 - Z95 * 0.1, 2.0 + Z95 * 0.1]])
    assert value == pytest.approx(1.5)
    assert (high - low) / 2 == pytest.approx(Z95 * 0.1 / math.sqrt(2) * math.sqrt(50), rel=1e-12)
    # without intervals it falls back to the Student-t interval of the values
    assert combine_ci95([1.0, 2.0], [None, None]) == mean_ci95([1.0, 2.0])
