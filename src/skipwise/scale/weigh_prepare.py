"""Preparing ``skipwise weigh --engine dask``: every partition encoded on its worker, the census merged.

The client receives each partition's :class:`~skipwise.scale.weigh_parts.PartCensus`
(counts, class keys, margin censuses, PSUs), reports every problem of the file at
once, fixes the global class and PSU codes (sorted as the in-memory engine sorts
them over the whole file) and sends each partition its local → global tables.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np

from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError
from skipwise.scale import weigh_parts as wp
from skipwise.weighting import calibrate as cal
from skipwise.weighting.adjust import class_labels, merge_class_keys
from skipwise.weighting.base import bad_weights_problem, base_source
from skipwise.weighting.margins import EncodedMargin, margin_data_problems, margin_targets, margin_total_problems
from skipwise.weighting.pipeline import disposition_problems
from skipwise.weighting.plan import WeightingPlan
from skipwise.weighting.replicates import ReplicateDesign

__all__ = ["Dist", "Encoded", "prepare_on_cluster"]


class Dist:
    """Per-partition futures and the two moves of every pass: map on the workers, add up on the client."""

    def __init__(self, client, states: list) -> None:
        self.client = client
        self.states = states

    def on(self, fn: Callable, *vectors: list, **const) -> list:
        """``fn(state, v1[i], v2[i], ..., **const)`` on every partition."""
        return [self.client.submit(fn, s, *(v[i] for v in vectors), pure=False, **const)
                for i, s in enumerate(self.states)]

    def each(self, fn: Callable, *vectors: list, **const) -> list:
        """``fn(v1[i], ..., **const)`` on every partition (no state)."""
        return [self.client.submit(fn, *(v[i] for v in vectors), pure=False, **const)
                for i in range(len(self.states))]

    def gather(self, futures: list) -> list:
        return self.client.gather(futures)

    def total(self, futures: list):
        parts = self.gather(futures)
        out = parts[0]
        for p in parts[1:]:
            out = out + p if not isinstance(out, (list, tuple)) else type(out)(a + b for a, b in zip(out, p))
        return out

    def column(self, futures: list) -> np.ndarray:
        """One weight column (its positive values) gathered to the client, in file order."""
        return np.concatenate(self.gather(self.each(wp.positive, futures)))


@dataclass(kw_only=True)
class Encoded:
    """The client's side of the prepared data: labels, targets, counts (no per-case arrays)."""

    rows: int
    counts: dict
    counts_weighted: dict
    elig_labels: list[str]
    nr_labels: list[str]
    margins: list[EncodedMargin]
    t: np.ndarray | None
    resp_rows: list[int]
    respondents: int
    eligible: int
    unknown: int
    base_sum: float = 0.0
    design: ReplicateDesign | None = None


def _merge_problems(problems: list[Problem]) -> list[Problem]:
    seen, out = set(), []
    for p in problems:
        key = (p.code, p.item, p.message)
        if key not in seen:
            seen.add(key)
            out.append(p)
    return out


def prepare_on_cluster(client, parts: list, plan: WeightingPlan, dtypes: dict[str, str] | None = None, *,
                       questionnaire=None, meta=None) -> tuple[Dist, Encoded]:
    """Read and encode every partition on the workers; check the merged census on the client.

    ``dtypes``, ``meta``: the whole file's column types and metadata of converted input
    (:mod:`skipwise.scale.convert`).  ``questionnaire``: every partition is classified on its
    worker (for the plan's interview split).
    """
    from skipwise.scale.weigh_replicates import design_of
    from skipwise.weighting.outcomes import bad_share_problem

    offsets = np.concatenate([[0], np.cumsum([p.rows for p in parts])])
    plan_future, q_future, meta_future = client.scatter([plan, questionnaire, meta], broadcast=True, hash=False)
    pairs = [client.submit(wp.prepare_part, p, plan_future, int(offsets[i]), dtypes, q_future, meta_future,
                           pure=False) for i, p in enumerate(parts)]
    census = client.gather([client.submit(wp.census_of, f, pure=False) for f in pairs])
    states = [client.submit(wp.state_of, f, pure=False) for f in pairs]
    problems = _merge_problems([p for c in census for p in c.problems])
    unmapped: dict[str, int] = {}
    for c in census:
        for k, v in c.unmapped.items():
            unmapped[k] = unmapped.get(k, 0) + v
    problems += disposition_problems(plan, sum(c.no_disposition for c in census), unmapped)
    bad_share = sum(c.bad_share for c in census)
    if bad_share:  # counted over the file, the first cases in file order, as the in-memory engine names them
        problems.append(bad_share_problem(bad_share, [i for c in census for i in c.bad_share_ids][:5]))
    bad = sum(c.bad_base for c in census)
    if bad:
        column, what, upper = base_source(plan.base_probability, plan.base_weight)
        ids = [i for c in census for i in c.bad_base_ids][:5]
        problems.append(bad_weights_problem(bad, ids, column, what, upper))
    margins: list[EncodedMargin] = []
    c = plan.calibration
    if c is not None and c.margins:
        targets, _ = margin_targets(c.margins, locate=plan.locate)
        present = [v for v in targets if not any(p.code == ProblemCode.MISSING_COLUMN and p.item == v
                                                 for p in problems)]
        for j, variable in enumerate(present):
            labels, values = targets[variable]
            merged = census[0].margins[j]
            for other in census[1:]:
                merged = merged + other.margins[j]
            found = margin_data_problems(variable, labels, values, merged, locate=plan.locate)
            problems += found
            if not found:
                margins.append(EncodedMargin(variable=variable, labels=labels, targets=values,
                                             codes=np.zeros(0, dtype=np.intp)))
        problems += margin_total_problems(margins, locate=plan.locate)
    if problems:
        raise SkipwiseError(problems)
    respondents = sum(c.respondents for c in census)
    if not respondents:
        raise SkipwiseError(Problem(code=ProblemCode.BAD_DATA, category=Category.DATA,
                                    message="no respondent (no disposition maps to I or P)"))
    elig_keys, elig_map = merge_class_keys(plan.eligibility_classes or (), [c.elig_keys for c in census]) \
        if plan.eligibility_classes is not None else ([], [None] * len(parts))
    nr = plan.nonresponse
    by_classes = nr is not None and nr.method == "classes"
    nr_keys, nr_map = merge_class_keys(nr.classes, [c.nr_keys for c in census]) if by_classes \
        else ([], [None] * len(parts))
    design, unit_map = design_of(plan, census)
    states = [client.submit(wp.remap, s, elig_map[i], nr_map[i], unit_map[i], pure=False)
              for i, s in enumerate(states)]
    t = None
    if c is not None and c.method in ("linear", "logit"):
        numeric = {name: (np.zeros(0), float(total)) for name, total in c.totals.items()}
        t = cal.design_matrix(margins, numeric)[1] if (margins or numeric) else np.zeros(0)
    counts = {k: sum(cc.counts[k] for cc in census) for k in census[0].counts}
    weighted = {k: sum(cc.counts_weighted[k] for cc in census) for k in census[0].counts_weighted}
    enc = Encoded(rows=int(offsets[-1]), counts=counts, counts_weighted=weighted,
                  elig_labels=class_labels(plan.eligibility_classes or (), elig_keys)
                  if plan.eligibility_classes is not None else [],
                  nr_labels=class_labels(nr.classes, nr_keys) if by_classes else [], margins=margins, t=t,
                  resp_rows=[cc.respondents for cc in census], respondents=respondents,
                  eligible=sum(cc.eligible for cc in census), unknown=sum(cc.unknown for cc in census),
                  design=design)
    return Dist(client, states), enc
