"""Worker side of ``skipwise weigh --engine dask``: one partition's encoded state and its partial sums.

:func:`prepare_part` reads the columns the plan needs from one partition and
keeps, on the worker, only what the weighting chain needs per case (outcome
masks, base weights, local class codes, margin codes, the calibration matrix,
PSU codes); it returns a small :class:`PartCensus` that the client merges to
check the data and fix the global class and PSU codes.  Every other function
here is row-local: it maps one partition's weights to new weights, or to
partial sums that add up on the client, where the one implementation of each
step's math (:mod:`skipwise.weighting`) turns them into factors.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from pathlib import Path

import numpy as np
import pandas as pd

from skipwise.errors import Problem, ProblemCode, SkipwiseError, did_you_mean
from skipwise.weighting import calibrate as cal
from skipwise.weighting.adjust import ClassSums, apply_class_factors, class_keys, class_sums
from skipwise.weighting.base import bad_weight_mask, base_source, base_values
from skipwise.weighting.margins import EncodedMargin, MarginCensus, margin_census, margin_codes, margin_targets
from skipwise.weighting.outcomes import count_outcomes
from skipwise.weighting.pipeline import ELIGIBLE, UNKNOWN, disposition_outcomes, respondent_categories
from skipwise.weighting.plan import WeightingPlan

__all__ = ["PartState", "PartCensus", "plan_columns", "prepare_part", "census_of", "state_of"]


@dataclass(frozen=True, kw_only=True)
class PartState:
    """What the chain needs of one partition's cases; stays on the worker."""

    n: int
    outcome: np.ndarray
    respondent: np.ndarray
    eligible: np.ndarray
    known: np.ndarray
    unknown: np.ndarray
    base: np.ndarray
    elig_codes: np.ndarray | None = None
    nr_codes: np.ndarray | None = None
    margin_codes: tuple[np.ndarray, ...] = ()
    x: np.ndarray | None = None
    unit: np.ndarray | None = None      # local PSU codes until :func:`remap` makes them global
    x_prop: pd.DataFrame | None = None  # propensity covariates of the eligible cases (gathered)
    answered: pd.DataFrame | None = None  # with a questionnaire: the estimate items' answered values


@dataclass(frozen=True, kw_only=True)
class PartCensus:
    """What the client needs of one partition to check the data and fix global codes (small)."""

    rows: int
    problems: tuple[Problem, ...] = ()
    no_disposition: int = 0
    unmapped: dict = field(default_factory=dict)
    bad_base: int = 0
    bad_base_ids: tuple = ()
    bad_share: int = 0                     # interviews split without a usable share answered
    bad_share_ids: tuple = ()
    counts: dict = field(default_factory=dict)
    counts_weighted: dict = field(default_factory=dict)
    elig_keys: list = field(default_factory=list)
    nr_keys: list = field(default_factory=list)
    margins: tuple[MarginCensus, ...] = ()
    units: pd.DataFrame | None = None      # distinct (stratum, psu) in order of first appearance
    fraction: pd.DataFrame | None = None   # per stratum: min and max sampling fraction, bad values
    respondents: int = 0
    eligible: int = 0
    unknown: int = 0


def plan_columns(plan: WeightingPlan) -> list[str]:
    """Every column the plan reads (the partition is read with these only)."""
    cols: list[str | None] = [plan.dispositions.column, plan.case_id, plan.base_probability, plan.base_weight]
    cols += list(plan.eligibility_classes or ())
    nr = plan.nonresponse
    if nr is not None:
        cols += list(nr.classes) + list(nr.covariates)
    c = plan.calibration
    if c is not None:
        cols += list(c.margins) + list(c.totals)
    r = plan.replicates
    if r is not None:
        cols += [r.psu, r.strata, (r.fraction or plan.base_probability) if r.fpc else None]
    seen: list[str] = []
    for col in cols:
        if col is not None and str(col) not in seen:
            seen.append(str(col))
    return seen


def _read(part, columns: list[str], dtypes: dict[str, str] | None = None) -> pd.DataFrame:
    """The ``columns`` of one partition (those present), in the whole file's types when ``dtypes`` is given."""
    import pyarrow.parquet as pq

    from skipwise.io.readers import parquet_frame

    pf = pq.ParquetFile(part.path)
    present = [c for c in columns if c in pf.schema_arrow.names]
    table = (pf.read_row_groups(list(part.row_groups), columns=present) if part.row_groups
             else pf.schema_arrow.empty_table().select(present))
    frame = parquet_frame(table, Path(part.path))
    if dtypes:  # a converted file's chunks: every partition in the whole file's column types
        from skipwise.scale.convert import harmonize

        frame = harmonize(frame, dtypes)
    return frame


def _attempt(problems: list[Problem], fn, *args, **kwargs):
    try:
        return fn(*args, **kwargs)
    except SkipwiseError as err:
        problems.extend(err.problems)
        return None


def _classified(part, plan: WeightingPlan, offset: int, q, meta,
                dtypes) -> tuple[pd.DataFrame, pd.Series, pd.DataFrame | None]:
    """One partition classified by the in-memory classifier: the plan's columns, each case's share
    answered and the estimate items' answered values (NaN for every other status; None without
    estimates or replicates, which alone make estimates).

    Classification is row-local, so each case's statuses and share of applicable items answered
    are the ones the in-memory engine finds classifying the whole file.  The whole partition is
    read (the questionnaire's items too); only the plan's columns and the answered values are kept.
    """
    from skipwise.classify import classify
    from skipwise.pipeline.steps import answered_values
    from skipwise.scale.sources import read_part

    whole = read_part(part, meta, dtypes)
    whole.index = pd.RangeIndex(offset, offset + len(whole))
    cl = classify(whole, q)
    values = answered_values(cl, whole, plan) if plan.estimates is not None and plan.replicates is not None \
        else None
    keep = [c for c in plan_columns(plan) if c in whole.columns]
    return whole[keep], cl.cases["share_answered"], values


def _split(outcome: np.ndarray, share: pd.Series, plan: WeightingPlan, census: dict) -> np.ndarray:
    """The plan's interview split on one partition; cases without a usable share are counted, not split."""
    from skipwise.weighting.outcomes import bad_shares
    from skipwise.weighting.pipeline import split_interviews

    sel = pd.Series(outcome).isin(plan.dispositions.split.applies_to).to_numpy()
    bad = bad_shares(share[sel])
    if bad.any():
        census["bad_share"] = int(bad.sum())
        census["bad_share_ids"] = tuple(v.item() if hasattr(v, "item") else v for v in share.index[sel][bad][:5])
        return outcome
    return split_interviews(outcome, share, plan)


def prepare_part(part, plan: WeightingPlan, offset: int, dtypes: dict[str, str] | None = None, q=None,
                 meta=None) -> tuple[PartState, PartCensus]:
    """Read one partition and encode it; ``offset`` is its first row's position in the file.

    ``dtypes``, ``meta``: the whole file's column types and metadata when the partitions were
    converted (:mod:`skipwise.scale.convert`).  ``q``: the questionnaire, when given the
    partition is classified and the plan's interview split applied from each case's share
    of applicable items answered, and the estimates use the answered cells only (as ``weigh -q``
    does in memory).
    """
    share = answered = None
    if q is not None:
        frame, share, answered = _classified(part, plan, offset, q, meta, dtypes)
    else:
        frame = _read(part, plan_columns(plan), dtypes)
        frame.index = pd.RangeIndex(offset, offset + len(frame))  # case positions in the file, as in memory
    problems: list[Problem] = []
    n = len(frame)
    outcome, no_disp, unmapped = disposition_outcomes(frame[plan.dispositions.column], plan) \
        if plan.dispositions.column in frame.columns else (np.full(n, None, dtype=object), 0, {})
    split_census: dict = {}
    if plan.dispositions.split is not None and share is not None:
        outcome = _split(outcome, share, plan, split_census)
    respondent = np.isin(outcome, respondent_categories(plan))
    eligible = np.isin(outcome, ELIGIBLE)
    unknown = np.isin(outcome, UNKNOWN)
    known = eligible | (outcome == "NE")
    column, what, upper = base_source(plan.base_probability, plan.base_weight)
    raw = _attempt(problems, base_values, frame, column, what, probability=False)
    bad = np.zeros(n, dtype=bool) if raw is None or column is None else bad_weight_mask(raw, upper)
    base = np.ones(n) if raw is None else (1.0 / np.where(bad, 1.0, raw) if plan.base_probability else raw)
    ids = (frame[plan.case_id] if plan.case_id and plan.case_id in frame.columns else frame.index.to_series())[bad]
    census = dict(rows=n, no_disposition=no_disp, unmapped=unmapped, bad_base=int(bad.sum()),
                  bad_base_ids=tuple(v.item() if hasattr(v, "item") else v for v in ids.iloc[:5]),
                  respondents=int(respondent.sum()), eligible=int(eligible.sum()), unknown=int(unknown.sum()),
                  **split_census)
    state = dict(n=n, outcome=outcome, respondent=respondent, eligible=eligible, known=known, unknown=unknown,
                 base=base, answered=answered)
    if not no_disp and not unmapped and not bad.any() and not split_census:
        cats = pd.Series(outcome, dtype=object)
        census["counts"] = count_outcomes(cats)
        census["counts_weighted"] = count_outcomes(cats, base)
    if plan.eligibility_classes is not None:
        got = _attempt(problems, class_keys, frame, plan.eligibility_classes, rows=known | unknown,
                       step="eligibility")
        if got is not None:
            state["elig_codes"], census["elig_keys"] = got
    nr = plan.nonresponse
    if nr is not None and nr.method == "classes":
        got = _attempt(problems, class_keys, frame, nr.classes, rows=eligible, step="nonresponse")
        if got is not None:
            state["nr_codes"], census["nr_keys"] = got
    elif nr is not None:
        missing = [v for v in nr.covariates if v not in frame.columns]
        if not missing:
            state["x_prop"] = frame.loc[eligible, list(nr.covariates)]
    c = plan.calibration
    if c is not None and c.margins:
        targets, _ = margin_targets(c.margins, locate=plan.locate)
        resp = frame.loc[respondent]
        censuses, codes, enc = [], [], []
        for variable, (labels, values) in targets.items():
            if variable not in resp.columns:
                problems.append(Problem(code=ProblemCode.MISSING_COLUMN, item=variable,
                                        message=f"margin variable '{variable}' is not a column of the data",
                                        hint=did_you_mean(variable, map(str, frame.columns)),
                                        **plan.locate(variable, None)))
                continue
            censuses.append(margin_census(resp[variable]))
            codes.append(margin_codes(resp[variable], labels))
            enc.append(EncodedMargin(variable=variable, labels=labels, targets=values, codes=codes[-1]))
        census["margins"] = tuple(censuses)
        state["margin_codes"] = tuple(codes)
        if c.method in ("linear", "logit") and len(enc) == len(targets):
            numeric = _attempt(problems, cal._numeric, resp, c.totals)
            if numeric is not None and all((m.codes >= 0).all() for m in enc):
                state["x"] = cal.design_matrix(enc, numeric)[0] if (enc or numeric) else None
    elif c is not None and c.totals and c.method in ("linear", "logit"):
        numeric = _attempt(problems, cal._numeric, frame.loc[respondent], c.totals)
        if numeric is not None:
            state["x"] = cal.design_matrix([], numeric)[0]
    r = plan.replicates
    if r is not None:
        _units(frame, plan, problems, state, census)
    return PartState(**state), PartCensus(problems=tuple(problems), **census)


def _units(frame: pd.DataFrame, plan: WeightingPlan, problems: list[Problem], state: dict, census: dict) -> None:
    from skipwise.weighting.replicates import unit_check_problems

    r = plan.replicates
    found = unit_check_problems(frame, r.psu, r.strata)
    if found:
        problems.extend(found)
        return
    n = len(frame)
    strata = frame[r.strata] if r.strata else pd.Series(np.zeros(n, dtype=np.int64), index=frame.index)
    psu = frame[r.psu] if r.psu else pd.Series(frame.index.to_numpy(), index=frame.index)
    pairs = pd.DataFrame({"stratum": strata.to_numpy(), "psu": psu.to_numpy()})
    local, uniques = pd.MultiIndex.from_frame(pairs).factorize()
    state["unit"] = local.astype(np.intp)
    census["units"] = pd.DataFrame(list(uniques), columns=["stratum", "psu"])
    if r.fpc:
        col = r.fraction or plan.base_probability
        if col in frame.columns:
            f = pd.to_numeric(frame[col], errors="coerce").to_numpy(dtype=float)
            bad = np.isnan(f) | (f < 0) | (f >= 1)
            census["fraction"] = pd.DataFrame({"stratum": strata.to_numpy(), "f": f, "bad": bad}).groupby(
                "stratum", sort=False).agg(lo=("f", "min"), hi=("f", "max"), bad=("bad", "sum")).reset_index()


def census_of(pair: tuple[PartState, PartCensus]) -> PartCensus:
    return pair[1]


def state_of(pair: tuple[PartState, PartCensus]) -> PartState:
    return pair[0]


def remap(state: PartState, elig: np.ndarray | None, nr: np.ndarray | None, unit: np.ndarray | None) -> PartState:
    """Local class and PSU codes → the file's codes (``elig``/``nr``/``unit``: local → global)."""
    def to_global(codes: np.ndarray | None, table: np.ndarray | None) -> np.ndarray | None:
        if codes is None or table is None:
            return codes
        return np.where(codes >= 0, table[np.where(codes >= 0, codes, 0)], -1).astype(np.intp)

    return replace(state, elig_codes=to_global(state.elig_codes, elig), nr_codes=to_global(state.nr_codes, nr),
                   unit=to_global(state.unit, unit))


# --- row-local steps ----------------------------------------------------------------------------

_STEP_MASKS = {"eligibility": ("elig_codes", lambda s: s.known | s.unknown, lambda s: s.known),
               "nonresponse": ("nr_codes", lambda s: s.eligible, lambda s: s.respondent)}


def step_sums(state: PartState, w: np.ndarray, step: str, n_classes: int, codes: np.ndarray | None = None
              ) -> ClassSums:
    attr, total, kept = _STEP_MASKS[step]
    return class_sums(w, getattr(state, attr) if codes is None else codes, n_classes, total(state), kept(state))


def step_apply(state: PartState, w: np.ndarray, step: str, factor_of_class: np.ndarray,
               codes: np.ndarray | None = None) -> np.ndarray:
    attr, total, kept = _STEP_MASKS[step]
    return apply_class_factors(w, getattr(state, attr) if codes is None else codes, factor_of_class, total(state),
                               kept(state))


def keep_only(state: PartState, w: np.ndarray, mask: str) -> np.ndarray:
    return np.where(getattr(state, mask), w, 0.0)


def scaled(state: PartState, w: np.ndarray, factors: np.ndarray | None) -> np.ndarray:
    """Base weights times a replicate's factors (``factors`` per global PSU)."""
    return w if factors is None else w * factors[state.unit]


def respondents_of(state: PartState, w: np.ndarray) -> np.ndarray:
    return w[state.respondent]


def expand(state: PartState, wr: np.ndarray) -> np.ndarray:
    out = np.zeros(state.n)
    out[state.respondent] = wr
    return out


def margin_sums(state: PartState, wr: np.ndarray, which: list[int], sizes: list[int]) -> list[np.ndarray]:
    return [np.bincount(state.margin_codes[j], weights=wr, minlength=sizes[j]) for j in which]


def margin_scale(state: PartState, wr: np.ndarray, j: int, f: np.ndarray) -> np.ndarray:
    return wr * f[state.margin_codes[j]]


def linear_part_sums(state: PartState, d: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    return cal.linear_sums(d, state.x)


def linear_apply(state: PartState, d: np.ndarray, lam: np.ndarray) -> np.ndarray:
    return d * (1.0 + state.x @ lam)


def x_of(state: PartState) -> np.ndarray:
    return state.x


def positive(w: np.ndarray) -> np.ndarray:
    return w[w > 0]


def clipped(w: np.ndarray, cap: float) -> np.ndarray:
    return np.minimum(w, cap)


def spread_sums(v: np.ndarray, cap: float) -> tuple[int, float]:
    at_cap = v >= cap
    return int(at_cap.sum()), float(v[~at_cap].sum())


def spread_apply(v: np.ndarray, cap: float, f: float) -> np.ndarray:
    return np.where(v >= cap, v, v * f)


def largest(w: np.ndarray) -> float:
    return float(w.max()) if len(w) else -np.inf


def take(values: np.ndarray, start: int, stop: int) -> np.ndarray:
    return values[start:stop]
