"""Quantiles and tail areas of Student's t, F, chi-square and the normal distribution.

They come from :mod:`scipy.special` (``stdtrit``, ``fdtri``, ``chdtri``, ``ndtri`` and their
tails), the functions :mod:`scipy.stats` evaluates underneath. Importing :mod:`scipy.stats`
costs about a second at the start of every command (it loads every distribution and parses
their docstrings); :mod:`scipy.special` costs a third of a second, and is imported on the first
call here (a plate's initial rates need none: :mod:`rateabs.slopes.chi2`). Every function takes
scalars or arrays and is checked against :mod:`scipy.stats` in ``tests/test_distributions.py``.

>>> round(float(t_two_sided(0.95, 10)), 4)   # Student's t table, 10 degrees of freedom
2.2281
"""

from __future__ import annotations

import numpy as np


class _Special:
    """:mod:`scipy.special`, imported on first use."""

    def __getattr__(self, name: str):
        from scipy import special as loaded

        return getattr(loaded, name)


special = _Special()


def t_quantile(q, dof):
    """Student's t quantile: the value below which a share ``q`` of the distribution lies."""
    return special.stdtrit(dof, q)


def t_two_sided(level, dof):
    """Student's t multiplier of a two-sided interval at confidence ``level`` (0.95 → 2.23 on
    10 degrees of freedom)."""
    return special.stdtrit(dof, 0.5 + np.asarray(level) / 2)


def t_two_sided_p(t, dof):
    """Two-sided p of a t statistic on ``dof`` degrees of freedom."""
    return 2 * special.stdtr(dof, -np.abs(t))


def f_quantile(q, dfn, dfd):
    """F quantile on (``dfn``, ``dfd``) degrees of freedom."""
    return special.fdtri(dfn, dfd, q)


def f_tail(x, dfn, dfd):
    """Upper tail area of F (the p of a variance-ratio test); 1 for x <= 0."""
    return special.fdtrc(dfn, dfd, np.maximum(x, 0.0))


def chi2_tail(x, dof):
    """Upper tail area of chi-square on ``dof`` degrees of freedom; 1 for x <= 0."""
    return special.chdtrc(dof, np.maximum(x, 0.0))


def chi2_quantile(q, dof):
    """Chi-square quantile on ``dof`` degrees of freedom."""
    return special.chdtri(dof, 1 - np.asarray(q))


def normal_quantile(q):
    """Standard normal quantile (0.975 → 1.96)."""
    return special.ndtri(q)


def normal_two_sided_p(z):
    """Two-sided p of a standard normal statistic."""
    return 2 * special.ndtr(-np.abs(z))
