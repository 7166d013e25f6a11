"""The bias of a mean of quantised readings, computed directly (no series): a check for the budget's term.

A rounding quantiser of step q fed x + e, e ~ N(0, sigma^2), gives count j with probability
Phi(((j + 1/2) q - x) / sigma) - Phi(((j - 1/2) q - x) / sigma); the expected reading is the sum of
j q times those (scipy.stats.norm), and its bias is that minus x.  The RMS over offsets x spread
evenly over one step is what logger.analysis.uncertainty.quantisation_bias_rms_mm states from the
Widrow-Kollar characteristic-function series.
"""

from __future__ import annotations

import numpy as np
from scipy import stats


def bias_rms_direct(q: float, sigma: float, offsets: int = 2000) -> float:
    x = (np.arange(offsets) + 0.5) / offsets * q  # a midpoint grid over one step
    if sigma == 0:
        bias = np.round(x / q) * q - x
    else:
        j = np.arange(-int(12 * sigma / q) - 3, int(12 * sigma / q) + 4)[:, None]
        p = stats.norm.cdf(((j + 0.5) * q - x) / sigma) - stats.norm.cdf(((j - 0.5) * q - x) / sigma)
        bias = (j * q * p).sum(axis=0) - x
    return float(np.sqrt(np.mean(bias**2)))
