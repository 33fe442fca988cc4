r"""Value at risk and expected shortfall of simulated P&L.

Notes
-----
For P&L samples :math:`x_1..x_n` (losses negative) and a confidence level
:math:`\alpha` (0.95, 0.99), with :math:`k = \lceil n(1-\alpha)\rceil` and
:math:`x_{(1)}\le\dots\le x_{(n)}`:

* VaR :math:`= -x_{(k)}`, the loss exceeded on no more than a share
  :math:`1-\alpha` of the paths (a positive number is a loss);
* ES :math:`= -\frac1k\sum_{j\le k} x_{(j)}`, the mean of the :math:`k` worst
  outcomes (Acerbi and Tasche, "On the coherence of expected shortfall", *Journal of
  Banking & Finance* 26(7), 2002; Hull, *Risk Management and Financial Institutions*,
  ch. 12 "Value at Risk and Expected Shortfall").

For normal P&L with mean :math:`\mu` and deviation :math:`\sigma` the closed forms
are VaR :math:`= -\mu + \sigma z_\alpha` and ES :math:`= -\mu + \sigma\varphi(z_\alpha)/(1-\alpha)`
(Hull, *RMFI*, chapter "Value at Risk and Expected Shortfall"; section from memory); the tests check the simulated figures against them.
"""
from __future__ import annotations

import math

import numpy as np

LEVELS = (0.95, 0.99)


def tail_count(n: int, level: float) -> int:
    return max(1, int(math.ceil(n * (1.0 - level) - 1e-9)))


def var_es(pnl, level: float) -> tuple[np.ndarray, np.ndarray]:
    """VaR and ES at ``level`` of each column of ``pnl`` (paths along axis 0)."""
    x = np.asarray(pnl, float)
    k = tail_count(x.shape[0], level)
    worst = np.partition(x, k - 1, axis=0)[:k]
    return -worst.max(axis=0), -worst.mean(axis=0)


def es_only(pnl, level: float) -> np.ndarray:
    """ES at ``level`` of each column of ``pnl`` (paths along axis 0)."""
    x = np.asarray(pnl, float).T          # rows = series: partition in contiguous memory
    k = tail_count(x.shape[1], level)
    return -np.partition(x, k - 1, axis=1)[:, :k].mean(axis=1)
