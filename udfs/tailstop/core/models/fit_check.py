"""The Anderson–Darling fit check with estimated parameters, shared by the Weibull and lognormal models.

Both models are location-scale families on the log scale, so the null
distribution of the statistic with estimated parameters does not depend on
the true parameters; it is still simulated (seeded, like the gamma check) so
that all three models report the same kind of p-value.
"""
from __future__ import annotations

import numpy as np
from scipy import stats

__all__ = ["anderson_darling", "monte_carlo_pvalue", "VALUE_BUDGET", "MIN_SAMPLES", "BATCH_VALUES", "SEED"]

# The same budget as the gamma check: samples × n simulated values at most.
VALUE_BUDGET = 20_000_000
MIN_SAMPLES = 99
BATCH_VALUES = 1_000_000
SEED = 20261201


def anderson_darling(log_cdf, log_sf):
    """A² = -n - Σ (2i-1)/n [log F(x_(i)) + log(1 - F(x_(n+1-i)))], rows of sorted values on the last axis."""
    n = log_cdf.shape[-1]
    weights = (2.0 * np.arange(1, n + 1) - 1.0) / n
    return -n - ((log_cdf + log_sf[..., ::-1]) * weights).sum(axis=-1)


def monte_carlo_pvalue(x, draw, statistic, *, samples=999, seed=SEED, label="the model"):
    """Seeded Monte Carlo p-value of ``statistic`` (vectorized over rows) under ``draw(size, rng)``.

    Uses ``scipy.stats.monte_carlo_test`` in batches (bounded memory); fewer
    samples for long logs, within ``VALUE_BUDGET``; refuses logs longer than
    the budget allows with ``MIN_SAMPLES`` samples.
    """
    samples = int(min(samples, VALUE_BUDGET // max(int(x.size), 1)))
    if samples < MIN_SAMPLES:
        raise ValueError(f"the fit check handles at most {VALUE_BUDGET // MIN_SAMPLES:,} units "
                         f"(got {x.size:,}); check a part of the log, e.g. the first units")
    rng = np.random.default_rng(seed)
    result = stats.monte_carlo_test(
        x, lambda size: draw(size, rng), statistic, vectorized=True, n_resamples=samples,
        batch=max(1, BATCH_VALUES // x.size), alternative="greater",
    )
    return float(result.pvalue)
