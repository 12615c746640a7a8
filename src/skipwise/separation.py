"""One detector of (quasi-)complete separation in a logistic regression, shared by weighting and diagnostics.

A binary outcome y is *separated* by the columns of X when some direction b
puts every y = 1 case on one side of a hyperplane and every y = 0 case on the
other.  Then the maximum-likelihood estimate does not exist: the coefficients
along b grow without bound, fitted probabilities go to exactly 0 or 1, and a
fit that "converges" reports odds ratios such as 8.5e+22 and an AUC of 1.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd
from scipy.optimize import linprog

__all__ = ["SeparationCheck", "detect_separation", "sentence", "NONE", "QUASI", "COMPLETE", "EXTREME_P"]

NONE, QUASI, COMPLETE = "none", "quasi-complete", "complete"
#: A fitted probability this close to 0 or 1 counts as "exactly" 0 or 1 (common practice, no source).
EXTREME_P = 1e-8
_TOL = 1e-7


@dataclass(frozen=True, kw_only=True)
class SeparationCheck:
    """The verdict of :func:`detect_separation`.

    Attributes
    ----------
    verdict
        ``"none"`` (the estimates exist), ``"quasi-complete"`` or ``"complete"``.
    terms
        Columns (other than the constant) of a separating direction: the coefficients that diverge.
    perfect_ones, perfect_zeros
        Cases with y = 1 (y = 0) that the separating direction predicts without error
        (fitted probability 1, respectively 0, in the limit).
    """

    verdict: str
    terms: tuple[str, ...] = ()
    perfect_ones: int = 0
    perfect_zeros: int = 0

    @property
    def separated(self) -> bool:
        return self.verdict != NONE

    def describe(self, one: str = "y = 1", zero: str = "y = 0") -> str:
        """The verdict in words, e.g. "quasi-complete separation by district=7: 5 nonrespondents predicted..."."""
        if not self.separated:
            return "no separation"
        by = f" by {', '.join(self.terms)}" if self.terms else ""
        parts = []
        if self.perfect_ones:
            parts.append(f"{self.perfect_ones:,} {one}")
        if self.perfect_zeros:
            parts.append(f"{self.perfect_zeros:,} {zero}")
        told = f": {' and '.join(parts)} predicted without error" if parts else ""
        return f"{self.verdict} separation{by}{told}; the coefficients involved have no finite estimate"


def detect_separation(x: pd.DataFrame | np.ndarray, y: np.ndarray | pd.Series, *,
                      names: list[str] | None = None) -> SeparationCheck:
    """Tell whether ``y`` is (quasi-)completely separated by the columns of ``x``.

    With s_i = 2 y_i - 1 and a_i = s_i x_i, the data are separated when some
    b != 0 has a_i·b >= 0 for every case and > 0 for at least one (Albert &
    Anderson 1984); completely separated when a_i·b > 0 for every case.  Both
    are linear programs over b in [-1, 1]^p (columns scaled to unit maximum):
    maximize Σ a_i·b subject to a_i·b >= 0 (any separation, Konis 2007), and
    maximize t subject to a_i·b >= t (complete separation).  The answer does
    not depend on a fit: a fit only shows the symptoms (coefficients that keep
    growing, fitted probabilities of exactly 0 or 1).

    Parameters
    ----------
    x
        The design matrix, constant included (a column named ``const`` is not listed in ``terms``).
    y
        The binary outcome (True / 1 = event).
    names
        Column names when ``x`` is an array.

    References
    ----------
    Albert, A. & Anderson, J. A. (1984). On the existence of maximum likelihood estimates in
    logistic regression models. *Biometrika* 71(1), 1-10.
    Konis, K. (2007). *Linear programming algorithms for detecting separated data in binary
    logistic regression models*. DPhil thesis, University of Oxford.
    """
    if isinstance(x, pd.DataFrame):
        names = [str(c) for c in x.columns]
        xv = x.to_numpy(dtype=float)
    else:
        xv = np.asarray(x, dtype=float)
        names = names or [f"x{j}" for j in range(xv.shape[1])]
    yv = np.asarray(y).astype(bool)
    if xv.shape[0] == 0 or yv.all() or not yv.any():
        return SeparationCheck(verdict=NONE)
    scale = np.abs(xv).max(axis=0)
    keep = scale > 0
    xs = xv[:, keep] / scale[keep]
    kept_names = [n for n, k in zip(names, keep) if k]
    a = np.where(yv, 1.0, -1.0)[:, None] * xs
    n, p = a.shape
    res = linprog(-a.sum(axis=0), A_ub=-a, b_ub=np.zeros(n), bounds=[(-1.0, 1.0)] * p, method="highs")
    if res.status != 0 or -res.fun <= _TOL * max(n, 1):
        return SeparationCheck(verdict=NONE)
    b = res.x
    margin = a @ b
    strict = margin > 1e-6
    full = linprog(np.r_[np.zeros(p), -1.0], A_ub=np.c_[-a, np.ones(n)], b_ub=np.zeros(n),
                   bounds=[(-1.0, 1.0)] * p + [(None, 1.0)], method="highs")
    complete = full.status == 0 and -full.fun > 1e-6
    if complete:
        b = full.x[:p]
        strict = np.ones(n, dtype=bool)
    big = np.abs(b) > 1e-6 * max(float(np.abs(b).max()), 1e-300)
    terms = tuple(nm for nm, on in zip(kept_names, big) if on and nm != "const")
    return SeparationCheck(verdict=COMPLETE if complete else QUASI, terms=terms,
                           perfect_ones=int((strict & yv).sum()), perfect_zeros=int((strict & ~yv).sum()))


def sentence(text: str) -> str:
    """``text`` as a sentence: first letter upper case (the rest as written), a full stop at the end."""
    return text[:1].upper() + text[1:] + ("" if text.endswith(".") else ".")
