"""The exceedance probability as every model reports it: p, log p, log(1 - p), log-odds."""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["TailProbability"]


@dataclass(frozen=True)
class TailProbability:
    """Exceedance probability of a lifetime and its complements in logs (any model).

    Attributes
    ----------
    p : ndarray
        P(X > threshold), from the directly computed tail.
    log_p : ndarray
        log P(X > threshold).
    log_cdf : ndarray
        log P(X <= threshold) = log(1 - p).
    """

    p: np.ndarray
    log_p: np.ndarray
    log_cdf: np.ndarray

    @property
    def cdf(self) -> np.ndarray:
        """P(X <= threshold) = 1 - p."""
        return np.exp(self.log_cdf)

    @property
    def log_odds(self) -> np.ndarray:
        """log(p / (1 - p))."""
        return self.log_p - self.log_cdf

    @property
    def odds(self) -> np.ndarray:
        """p / (1 - p)."""
        return np.exp(self.log_odds)
