"""The classic ways of handling missing data, each reporting what it cost.

Listwise deletion, dropping variables, pairwise-available covariance and
correlation, and mean / median / mode imputation. All functions are pure: they
take a DataFrame (missing = NaN / NA) and return a frozen result record.

References
----------
Little, R. J. A. and Rubin, D. B. (2019). *Statistical Analysis with Missing
Data*, 3rd ed. Wiley, ch. 3 (complete-case and available-case analysis, and
why single mean imputation understates variance).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal, Sequence

import numpy as np
import pandas as pd

from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError
from skipwise.impute.result import MNAR_CAUTION, ImputationResult, as_float_frame, check_columns

__all__ = [
    "ListwiseResult", "listwise_delete", "DropResult", "drop_variables",
    "PairwiseResult", "pairwise_cov", "pairwise_corr", "simple_impute", "SIMPLE_CAUTION",
]

#: Why single-value imputation is shown with a warning.
SIMPLE_CAUTION = (
    "Filling every gap with one value (mean, median or mode) shrinks the item's variance, "
    "piles cases on one value, weakens its correlations with other items and makes standard "
    "errors too small; use it only for quick looks, not for inference."
)


def _items(data: pd.DataFrame, items: Sequence[str] | None) -> list[str]:
    names = list(data.columns) if items is None else list(items)
    check_columns(data, names)
    return names


# --------------------------------------------------------------------------- listwise
@dataclass(frozen=True, kw_only=True)
class ListwiseResult:
    """Complete cases over the chosen items, and the cases lost.

    Attributes
    ----------
    data
        Rows complete on every chosen item (original index kept).
    items
        The items that had to be complete.
    n_before, n_after, n_lost
        Case counts.
    lost_by_item
        Per item, the number of cases missing on it (a case may count under several items).
    lost_by_group
        With ``by``: one row per group with ``n``, ``kept``, ``lost`` and ``share_lost``; else None.
    """

    data: pd.DataFrame
    items: tuple[str, ...]
    n_before: int
    n_after: int
    n_lost: int
    lost_by_item: pd.Series
    lost_by_group: pd.DataFrame | None = None

    @property
    def share_lost(self) -> float:
        return self.n_lost / self.n_before if self.n_before else 0.0

    def summary(self) -> str:
        text = (f"listwise deletion over {len(self.items)} items: {self.n_lost:,} of "
                f"{self.n_before:,} cases lost ({self.share_lost:.1%}); unbiased only if the "
                "complete cases are a random subsample (MCAR).")
        return text + "\ncaution: " + MNAR_CAUTION


def listwise_delete(data: pd.DataFrame, items: Sequence[str] | None = None, *,
                    by: str | Sequence[str] | None = None) -> ListwiseResult:
    """Keep only the cases complete on ``items`` (complete-case analysis).

    Parameters
    ----------
    data
        Survey frame, missing = NaN / NA.
    items
        Items that must be present (default: every column).
    by
        Optional grouping column(s) for the losses by group (missing group values form their own group).

    Returns
    -------
    ListwiseResult

    References
    ----------
    Little, R. J. A. and Rubin, D. B. (2019). *Statistical Analysis with Missing Data*, 3rd ed., sec. 3.2.

    Examples
    --------
    >>> df = pd.DataFrame({"a": [1, None, 3], "b": [1, 2, None]})
    >>> listwise_delete(df).n_lost
    2
    """
    names = _items(data, items)
    missing = data.loc[:, names].isna()
    complete = ~missing.any(axis=1)
    by_table = None
    if by is not None:
        keys = [by] if isinstance(by, str) else list(by)
        check_columns(data, keys, role="group")
        grouped = complete.groupby([data[k] for k in keys], dropna=False, sort=True)
        by_table = pd.DataFrame({"n": grouped.size(), "kept": grouped.sum().astype("int64")})
        by_table["lost"] = by_table["n"] - by_table["kept"]
        by_table["share_lost"] = by_table["lost"] / by_table["n"]
    n = len(data)
    kept = int(complete.sum())
    return ListwiseResult(
        data=data.loc[complete].copy(), items=tuple(names), n_before=n, n_after=kept,
        n_lost=n - kept, lost_by_item=missing.sum().astype("int64"), lost_by_group=by_table,
    )


# --------------------------------------------------------------------------- drop variables
@dataclass(frozen=True, kw_only=True)
class DropResult:
    """Variables dropped for too much missingness, and why.

    Attributes
    ----------
    data
        The frame without the dropped columns.
    dropped
        Names of dropped columns.
    reasons
        Per dropped column, a sentence saying why.
    missing_rate
        Missing share of every examined column.
    threshold
        The rate above which a column was dropped.
    """

    data: pd.DataFrame
    dropped: tuple[str, ...]
    reasons: dict[str, str]
    missing_rate: pd.Series
    threshold: float

    def summary(self) -> str:
        if not self.dropped:
            return f"no variable has more than {self.threshold:.0%} missing"
        return "\n".join(f"dropped {k}: {v}" for k, v in self.reasons.items())


def drop_variables(data: pd.DataFrame, items: Sequence[str] | None = None, *,
                   max_missing_rate: float = 0.5) -> DropResult:
    """Drop every examined column whose missing share exceeds ``max_missing_rate``.

    Parameters
    ----------
    data
        Survey frame, missing = NaN / NA.
    items
        Columns examined (default: all); other columns are always kept.
    max_missing_rate
        Drop a column when its missing share is strictly above this (0 to 1). A
        threshold is common practice, no source; choose it in advance.

    Returns
    -------
    DropResult
    """
    if not 0.0 <= max_missing_rate <= 1.0:
        raise SkipwiseError(Problem(code=ProblemCode.BAD_VALUE, category=Category.USAGE,
                                    message=f"max_missing_rate must lie in [0, 1], got {max_missing_rate}"))
    names = _items(data, items)
    n = len(data)
    rate = data.loc[:, names].isna().mean() if n else pd.Series(0.0, index=names)
    drop = [c for c in names if rate[c] > max_missing_rate]
    reasons = {c: f"{rate[c]:.1%} missing, above the {max_missing_rate:.0%} threshold" for c in drop}
    return DropResult(data=data.drop(columns=drop), dropped=tuple(drop), reasons=reasons,
                      missing_rate=rate, threshold=max_missing_rate)


# --------------------------------------------------------------------------- pairwise
@dataclass(frozen=True, kw_only=True)
class PairwiseResult:
    """A pairwise-available covariance or correlation matrix.

    Attributes
    ----------
    matrix
        Each entry computed from the cases present on both variables (NaN where
        fewer than ``min_periods`` such cases).
    n
        Pairwise number of cases of every entry.
    kind
        ``"covariance"`` or ``"correlation"``.
    eigenvalues
        Eigenvalues of ``matrix`` in ascending order (empty if it has NaN entries).
    psd
        Whether the matrix is positive semi-definite (within a relative tolerance);
        None when it has NaN entries. Pairwise matrices often are not, which
        breaks regression, factor analysis and Cholesky-based simulation.
    """

    matrix: pd.DataFrame
    n: pd.DataFrame
    kind: str
    eigenvalues: np.ndarray
    psd: bool | None

    @property
    def warning(self) -> str | None:
        if self.psd is False:
            return (f"the pairwise {self.kind} matrix is not positive semi-definite (smallest "
                    f"eigenvalue {self.eigenvalues[0]:.4g}); analyses that need a valid matrix will fail "
                    "or mislead")
        if self.psd is None:
            return f"some pairs have too few cases; the {self.kind} matrix has empty entries"
        return None


def _pairwise(data: pd.DataFrame, items: Sequence[str] | None, min_periods: int,
              kind: Literal["covariance", "correlation"], ddof: int) -> PairwiseResult:
    names = _items(data, items)
    check_columns(data, names, numeric=True)
    x = as_float_frame(data, names)
    present = ~np.isnan(x)
    m = present.astype("float64")
    # Centre by the column mean first: the sums below then avoid catastrophic cancellation.
    with np.errstate(invalid="ignore"):
        x = x - np.nanmean(x, axis=0) if len(x) else x
    xz = np.where(present, x, 0.0)
    n = m.T @ m                          # n[j, k]: cases present on both j and k
    sx = xz.T @ m                        # sx[j, k]: sum of x_j over those cases
    sxx = (xz * xz).T @ m                # sxx[j, k]: sum of x_j**2 over those cases
    sxy = xz.T @ xz                      # sum of x_j x_k over those cases
    with np.errstate(invalid="ignore", divide="ignore"):
        cross = sxy - sx * sx.T / n
        if kind == "covariance":
            mat = cross / (n - ddof)
        else:
            vj = sxx - sx ** 2 / n
            mat = cross / np.sqrt(vj * vj.T)
            np.fill_diagonal(mat, np.where(np.diag(n) >= max(min_periods, 2), 1.0, np.nan))
    mat = np.where(n >= min_periods, mat, np.nan)
    if kind == "correlation":
        mat = np.clip(mat, -1.0, 1.0)
    if np.isnan(mat).any() or not len(names):
        eig, psd = np.array([]), None
    else:
        eig = np.linalg.eigvalsh((mat + mat.T) / 2.0)
        # Relative tolerance for rounding error: common practice, no source.
        psd = bool(eig[0] >= -1e-10 * max(1.0, float(np.abs(eig).max())))
    return PairwiseResult(
        matrix=pd.DataFrame(mat, index=names, columns=names),
        n=pd.DataFrame(n.astype("int64"), index=names, columns=names),
        kind=kind, eigenvalues=eig, psd=psd,
    )


def pairwise_cov(data: pd.DataFrame, items: Sequence[str] | None = None, *,
                 min_periods: int = 2, ddof: int = 1) -> PairwiseResult:
    """Pairwise-available covariance matrix with the pairwise n of every entry.

    Entry (j, k) uses the cases present on both j and k, with their own means.

    References
    ----------
    Little, R. J. A. and Rubin, D. B. (2019). *Statistical Analysis with Missing Data*, 3rd ed., sec. 3.4.
    """
    return _pairwise(data, items, min_periods, "covariance", ddof)


def pairwise_corr(data: pd.DataFrame, items: Sequence[str] | None = None, *,
                  min_periods: int = 2) -> PairwiseResult:
    """Pairwise-available Pearson correlations (means and SDs from each pair's cases).

    References
    ----------
    Little, R. J. A. and Rubin, D. B. (2019). *Statistical Analysis with Missing Data*, 3rd ed., sec. 3.4.
    """
    return _pairwise(data, items, min_periods, "correlation", 1)


# --------------------------------------------------------------------------- mean / median / mode
def simple_impute(data: pd.DataFrame, items: Sequence[str] | None = None, *,
                  statistic: Literal["mean", "median", "mode"] = "mean",
                  by: str | Sequence[str] | None = None) -> ImputationResult:
    """Fill each item's gaps with one value: its mean, median or mode (overall or within ``by``).

    Ties of the mode go to the smallest value. Groups (of ``by``) without any
    observed value leave their gaps unfilled and are counted in ``unfilled``.

    Parameters
    ----------
    data
        Survey frame, missing = NaN / NA.
    items
        Items to fill (default: every column).
    statistic
        ``mean`` and ``median`` need numeric items; ``mode`` works for any.
    by
        Optional class column(s): fill with the statistic of the case's class.

    Returns
    -------
    ImputationResult
        Its ``cautions`` start with :data:`SIMPLE_CAUTION`.

    References
    ----------
    Little, R. J. A. and Rubin, D. B. (2019). *Statistical Analysis with Missing Data*, 3rd ed.,
    sec. 4.2 (unconditional mean imputation and its distortions).
    """
    if statistic not in ("mean", "median", "mode"):
        raise SkipwiseError(Problem(code=ProblemCode.BAD_VALUE, category=Category.USAGE,
                                    message=f"unknown statistic '{statistic}'",
                                    hint="use mean, median or mode"))
    names = _items(data, items)
    if statistic != "mode":
        check_columns(data, names, numeric=True)
    keys = None
    if by is not None:
        keys = [by] if isinstance(by, str) else list(by)
        check_columns(data, keys, role="class")
    out = data.copy()
    imputed = data.loc[:, names].isna()
    unfilled = {}
    for item in names:
        col = data[item]
        if statistic != "mode":
            col = col.astype("float64")  # a mean does not fit an integer column
        if keys is None:
            fill_value = _stat(col, statistic)
            filled = col.fillna(fill_value) if fill_value is not None else col
        else:
            grouped = col.groupby([data[k] for k in keys], dropna=False)
            fill = grouped.transform(lambda s: _stat(s, statistic))
            filled = col.fillna(fill)
        out[item] = filled
        still = filled.isna() & imputed[item]
        unfilled[item] = int(still.sum())
        imputed[item] = imputed[item] & ~still
    notes = (f"{statistic} imputation" + (f" within classes of {', '.join(keys)}" if keys else ""),)
    return ImputationResult(data=out, imputed=imputed, method=statistic,
                            unfilled=pd.Series(unfilled, dtype="int64"), notes=notes,
                            cautions=(SIMPLE_CAUTION, MNAR_CAUTION))


def _stat(s: pd.Series, statistic: str):
    obs = s.dropna()
    if obs.empty:
        return None
    if statistic == "mean":
        return float(obs.mean())
    if statistic == "median":
        return float(obs.median())
    return obs.mode().iloc[0]
