"""Item respondents versus item nonrespondents on fully observed auxiliaries.

If nonrespondents to an item differ from its respondents on variables known for
everyone (frame data, earlier answers), the item's nonresponse is not MCAR;
the same variables are then candidates for imputation models or weighting
classes.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass
from typing import Sequence

import numpy as np
import pandas as pd
from scipy import stats

from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError, did_you_mean

__all__ = ["ItemComparison", "compare_item", "infer_categorical", "prepare_auxiliaries"]

#: Default for :func:`infer_categorical` (common practice, no source).
MAX_LEVELS = 10


def infer_categorical(aux: pd.DataFrame, *, max_levels: int = MAX_LEVELS) -> tuple[str, ...]:
    """Names of auxiliaries to treat as categorical.

    Non-numeric columns are categorical; so are integer-valued numeric columns
    with at most ``max_levels`` distinct values (region codes, sex, ...).  The
    cut-off is common practice, no source; pass ``categorical`` explicitly
    where it matters.
    """
    out = []
    for col in aux.columns:
        s = aux[col]
        if not pd.api.types.is_numeric_dtype(s) or pd.api.types.is_bool_dtype(s):
            out.append(str(col))
            continue
        v = s.dropna()
        if len(v) and v.nunique() <= max_levels and np.all(np.mod(v.to_numpy(float), 1) == 0):
            out.append(str(col))
    return tuple(out)


def prepare_auxiliaries(indicator: pd.Series, aux: pd.DataFrame,
                        categorical: Sequence[str] | None) -> tuple[pd.Series, pd.DataFrame, tuple[str, ...], int]:
    """Align the indicator with the auxiliaries and drop cases with a missing auxiliary.

    Returns the indicator (bool), the auxiliaries, the categorical names and
    the number of cases dropped.
    """
    if not isinstance(aux, pd.DataFrame) or aux.shape[1] == 0:
        raise SkipwiseError(Problem(code=ProblemCode.BAD_VALUE, category=Category.USAGE,
                                    message="at least one auxiliary variable is needed"))
    cat = tuple(infer_categorical(aux) if categorical is None else (str(c) for c in categorical))
    unknown = [c for c in cat if c not in aux.columns]
    if unknown:
        raise SkipwiseError([Problem(code=ProblemCode.UNKNOWN_NAME, category=Category.USAGE,
                                     item=c, message="categorical auxiliary not among the auxiliaries",
                                     hint=did_you_mean(c, map(str, aux.columns))) for c in unknown])
    missing = [str(c) for c in aux.columns if c not in cat and not pd.api.types.is_numeric_dtype(aux[c])]
    if missing:
        raise SkipwiseError(Problem(
            code=ProblemCode.BAD_DATA, category=Category.DATA, item=", ".join(missing),
            message="non-numeric auxiliaries must be treated as categorical",
            hint="list them as categorical",
        ))
    sub = aux.loc[aux.index.intersection(indicator.index, sort=False)]
    ind = indicator.loc[sub.index].astype(bool)
    complete = sub.notna().all(axis=1)
    return ind[complete], sub[complete], cat, int((~complete).sum())


@dataclass(frozen=True, kw_only=True, eq=False)
class ItemComparison:
    """Respondents vs nonrespondents of one item.

    Attributes
    ----------
    item
        Item name.
    n_respondents, n_nonrespondents
        Cases compared (in scope, auxiliaries observed).
    n_dropped_aux_missing
        In-scope cases left out because an auxiliary was missing.
    table
        One row per auxiliary: ``auxiliary``, ``kind``, ``mean_respondents``,
        ``mean_nonrespondents``, ``difference`` (nonrespondents − respondents),
        ``std_difference``, ``test``, ``statistic``, ``df``, ``p_value``,
        ``cramers_v``.
    categories
        One row per (categorical auxiliary, category): counts, shares among
        respondents and nonrespondents, and the item nonresponse rate in the category.
    notes
        Remarks (small expected counts, too few nonrespondents, ...).
    """

    item: str
    n_respondents: int
    n_nonrespondents: int
    n_dropped_aux_missing: int
    table: pd.DataFrame
    categories: pd.DataFrame
    notes: tuple[str, ...]


def compare_item(indicator: pd.Series, aux: pd.DataFrame, *, categorical: Sequence[str] | None = None,
                 item: str | None = None) -> ItemComparison:
    """Compare an item's respondents and nonrespondents on each auxiliary.

    Parameters
    ----------
    indicator
        True = item nonresponse, over the item's in-scope cases only.
    aux
        Auxiliary variables (index matching ``indicator``); cases with any
        auxiliary missing are dropped and counted.
    categorical
        Auxiliaries to treat as categorical (default: :func:`infer_categorical`).
    item
        Name used in results.

    Returns
    -------
    ItemComparison

    Notes
    -----
    Numeric auxiliaries: difference of means, Welch's t-test and the
    standardized difference (mean difference over √((s²_r + s²_m)/2)).
    Categorical auxiliaries: Pearson's chi-square test of independence (no
    continuity correction) and Cramér's V = √(χ²/(n·(min(r, c) − 1))).

    References
    ----------
    Welch, B. L. (1947). The generalization of "Student's" problem when several
    different population variances are involved. *Biometrika*, 34, 28–35.
    Cramér, H. (1946). *Mathematical Methods of Statistics*. Princeton University Press.
    Austin, P. C. (2009). Balance diagnostics for comparing the distribution of
    baseline covariates between treatment groups. *Statistics in Medicine*, 28, 3083–3107.
    """
    name = str(item if item is not None else (indicator.name or "item"))
    ind, sub, cat, n_drop = prepare_auxiliaries(indicator, aux, categorical)
    miss = ind.to_numpy()
    n_m, n_r = int(miss.sum()), int((~miss).sum())
    notes: list[str] = []
    if n_drop:
        notes.append(f"{n_drop:,} in-scope cases with a missing auxiliary were left out.")
    if n_m < 2 or n_r < 2:
        notes.append("Fewer than two respondents or nonrespondents: no comparison is possible.")
    rows, cat_rows = [], []
    for col in sub.columns:
        col_name = str(col)
        s = sub[col]
        row: dict[str, object] = {"auxiliary": col_name}
        if col_name in cat:
            row["kind"] = "categorical"
            tab = pd.crosstab(s.astype(str), pd.Series(np.where(miss, "nonrespondent", "respondent"),
                                                       index=s.index))
            for k in ("respondent", "nonrespondent"):
                if k not in tab.columns:
                    tab[k] = 0
            tab = tab[["respondent", "nonrespondent"]]
            for cat_value, r in tab.iterrows():
                tot = r.sum()
                cat_rows.append({
                    "auxiliary": col_name, "category": cat_value,
                    "n_respondents": int(r["respondent"]), "n_nonrespondents": int(r["nonrespondent"]),
                    "share_respondents": r["respondent"] / n_r if n_r else np.nan,
                    "share_nonrespondents": r["nonrespondent"] / n_m if n_m else np.nan,
                    "nonresponse_rate": r["nonrespondent"] / tot if tot else np.nan,
                })
            row.update(mean_respondents=np.nan, mean_nonrespondents=np.nan, difference=np.nan,
                       std_difference=np.nan, test="chi-square")
            if tab.shape[0] >= 2 and n_m >= 1 and n_r >= 1:
                chi2, pval, dof, expected = stats.chi2_contingency(tab.to_numpy(), correction=False)
                row.update(statistic=float(chi2), df=float(dof), p_value=float(pval),
                           cramers_v=float(np.sqrt(chi2 / (len(s) * (min(tab.shape) - 1)))))
                if (expected < 5).mean() > 0.2:
                    # Cochran's rule for the chi-square approximation (Cochran 1954)
                    notes.append(f"{col_name}: more than 20% of expected counts are below 5; "
                                 "the chi-square p-value is rough.")
            else:
                row.update(statistic=np.nan, df=np.nan, p_value=np.nan, cramers_v=np.nan)
        else:
            row["kind"] = "numeric"
            x = s.to_numpy(float)
            xr, xm = x[~miss], x[miss]
            mr = xr.mean() if n_r else np.nan
            mm = xm.mean() if n_m else np.nan
            vr = xr.var(ddof=1) if n_r > 1 else np.nan
            vm = xm.var(ddof=1) if n_m > 1 else np.nan
            pooled = np.sqrt((vr + vm) / 2)
            row.update(mean_respondents=mr, mean_nonrespondents=mm, difference=mm - mr,
                       std_difference=(mm - mr) / pooled if pooled > 0 else np.nan,
                       test="Welch t", cramers_v=np.nan)
            if n_r > 1 and n_m > 1 and (vr > 0 or vm > 0):
                # Welch's t with Welch–Satterthwaite degrees of freedom, from the two-pass variances
                # above (scipy's own call warns when one group's values are (almost) all equal, as a
                # design variable often is among a few nonrespondents; the formula is the same)
                a, b = vm / n_m, vr / n_r
                dof = (a + b) ** 2 / (a ** 2 / (n_m - 1) + b ** 2 / (n_r - 1))
                tstat = (mm - mr) / np.sqrt(a + b)
                row.update(statistic=float(tstat), df=float(dof), p_value=float(2 * stats.t.sf(abs(tstat), dof)))
            else:
                row.update(statistic=np.nan, df=np.nan, p_value=np.nan)
        rows.append(row)
    cols = ["auxiliary", "kind", "mean_respondents", "mean_nonrespondents", "difference",
            "std_difference", "test", "statistic", "df", "p_value", "cramers_v"]
    cat_cols = ["auxiliary", "category", "n_respondents", "n_nonrespondents", "share_respondents",
                "share_nonrespondents", "nonresponse_rate"]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        table = pd.DataFrame(rows, columns=cols)
    return ItemComparison(item=name, n_respondents=n_r, n_nonrespondents=n_m,
                          n_dropped_aux_missing=n_drop, table=table,
                          categories=pd.DataFrame(cat_rows, columns=cat_cols), notes=tuple(notes))
