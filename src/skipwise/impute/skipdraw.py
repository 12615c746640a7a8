"""Drawing values for one item's cells to fill, from its answered cases, obeying the item.

Used by :mod:`skipwise.impute.skipaware`. Donors are the cases whose cell is
``answered``; recipients are given by row position. Drawn values obey the
item: categorical items only take declared values (every method here draws
from observed answers or observed categories), integers are rounded, numbers
clipped to the item's range, and a value equal to a special code is replaced
by a random donor value.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from skipwise.classify import statuses as S
from skipwise.impute.draws import draw_values
from skipwise.impute.encode import class_arrays, item_values, predictor_matrix
from skipwise.impute.hotdeck import hotdeck
from skipwise.questionnaire.model import CodeKind, Item, ItemType, Questionnaire

__all__ = ["draw_item", "resolve_method", "skip_code"]


def resolve_method(method: str, item: Item, donor_values: np.ndarray | None) -> str:
    """``auto``: logistic for a two-value categorical item, multinomial for more, pmm for numbers."""
    if method != "auto":
        return method
    if item.type is ItemType.CATEGORICAL:
        n_values = len(item.values) if item.values else (
            pd.Series(donor_values).nunique() if donor_values is not None else 3)
        return "logistic" if n_values == 2 else "multinomial"
    return "pmm"


def skip_code(data: pd.DataFrame, status: pd.DataFrame, q: Questionnaire, name: str, mode: str):
    """The value a cell routed out by an imputed gate gets (None: leave it blank)."""
    if mode == "blank":
        return None
    structural = [c for c in q.item(name).codes if c.kind is CodeKind.STRUCTURAL]
    if not structural:
        return None
    if mode == "code":
        return structural[0].value
    skipped = (status[name] == S.SKIPPED).to_numpy()
    col = data[name][skipped]
    if not skipped.any():
        return None
    counts = [int((col == c.value).sum()) for c in structural]
    best = int(np.argmax(counts))
    return structural[best].value if counts[best] * 2 > int(skipped.sum()) else None


def draw_item(work: pd.DataFrame, status: pd.DataFrame, q: Questionnaire, name: str, rule, rows: np.ndarray,
              rng: np.random.Generator) -> tuple[np.ndarray | None, str | None]:
    """Values for ``rows`` of item ``name`` by ``rule`` (an ItemRule); (None, note) when impossible."""
    item = q.item(name)
    donors = np.flatnonzero((status[name] == S.ANSWERED).to_numpy())
    if donors.size == 0:
        return None, "no answered case to draw from; cells left as they are"
    yv = item_values(work, status, q, name)
    method = resolve_method(rule.method, item, yv[donors])
    note = None
    if method in ("hotdeck", "nearest"):
        vals, note = _hotdeck(work, status, q, name, rule, rows, donors, method, rng)
    elif method in ("mode", "median", "mean"):
        vals = _single_value(work, status, q, name, rule, rows, donors, yv, method)
    else:
        x = predictor_matrix(work, status, q, rule.covariates)
        y_obs = yv[donors]
        if method in ("pmm", "regression"):
            y_obs = y_obs.astype(float)
        vals, note = draw_values(method, y_obs, x[donors], x[rows], rng, proper=True, k=rule.donors)
    numeric = pd.api.types.is_numeric_dtype(work[name]) and not pd.api.types.is_bool_dtype(work[name])
    return _obey(item, np.asarray(vals), yv[donors], rng, numeric), note


def _hotdeck(work, status, q, name, rule, rows, donors, method, rng):
    sub = np.concatenate([donors, rows])
    y = work[name].iloc[sub].reset_index(drop=True).astype(object)
    y.iloc[donors.size:] = np.nan
    frame = {"__y": y}
    classes = list(rule.classes)
    for c, arr in zip(classes, class_arrays(work, status, q, classes)):
        frame[f"c:{c}"] = arr[sub]
    covs = None
    if method == "nearest":
        x = predictor_matrix(work, status, q, rule.covariates)
        covs = [f"x{i}" for i in range(x.shape[1])]
        for i, col in enumerate(covs):
            frame[col] = x[sub, i]
    weights = None
    if rule.weights is not None and method == "hotdeck":
        frame["__w"] = work[rule.weights].to_numpy(dtype=float, na_value=np.nan)[sub]
        weights = "__w"
    res = hotdeck(pd.DataFrame(frame), ["__y"], classes=[f"c:{c}" for c in classes], covariates=covs,
                  weights=weights, k=rule.donors if method == "nearest" else 1,
                  max_donor_use=rule.max_donor_use, seed=rng)
    vals = res.data["__y"].to_numpy(dtype=object, copy=True)[donors.size:]
    note = "; ".join(c.text().split(": ", 1)[1] for c in res.collapses) or None
    if res.unfilled["__y"]:
        # A donor limit can exhaust every donor: the rest get unrestricted draws from all donors.
        left = pd.isna(vals)
        vals[left] = work[name].to_numpy(dtype=object)[donors[rng.integers(0, donors.size, int(left.sum()))]]
        note = (note + "; " if note else "") + f"{int(left.sum()):,} drawn beyond the donor limit"
    return vals, note


def _single_value(work, status, q, name, rule, rows, donors, yv, method):
    obs = pd.Series(yv[donors])
    arrays = class_arrays(work, status, q, list(rule.classes))
    keys = [pd.Series(a[donors]) for a in arrays]

    def stat(s: pd.Series):
        if method == "mode":
            return s.mode().iloc[0]
        return float(s.astype(float).median() if method == "median" else s.astype(float).mean())

    overall = stat(obs)
    if not keys:
        return np.full(rows.size, overall, dtype=object)
    by = obs.groupby(keys, dropna=False).agg(stat)
    rec_keys = pd.MultiIndex.from_arrays([a[rows] for a in arrays])
    vals = by.reindex(rec_keys if len(keys) > 1 else rec_keys.get_level_values(0)).to_numpy(dtype=object, copy=True)
    vals[pd.isna(vals)] = overall
    return vals


def _obey(item: Item, vals: np.ndarray, donor_vals: np.ndarray, rng: np.random.Generator,
          numeric: bool) -> np.ndarray:
    """Round, clip and keep clear of special codes (donor values already obey the item)."""
    if numeric:
        x = vals.astype(float)
        if item.type is ItemType.INTEGER:
            x = np.round(x)
        if item.range is not None:
            lo, hi = float(item.range[0]), float(item.range[1])
            if item.type is ItemType.INTEGER:
                lo, hi = np.ceil(lo), np.floor(hi)
            x = np.clip(x, lo, hi)
        if item.type is ItemType.CATEGORICAL and item.values:
            allowed = np.array([float(k) for k in item.values if not isinstance(k, str)])
            bad = ~np.isin(x, allowed)
        else:
            codes = np.array([float(c.value) for c in item.codes if not isinstance(c.value, str)])
            bad = np.isin(x, codes)
        if bad.any():
            x[bad] = donor_vals[rng.integers(0, donor_vals.size, int(bad.sum()))].astype(float)
        return x
    return vals
