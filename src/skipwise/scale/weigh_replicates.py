"""Replicates, the propensity model and the weighted parts of ``skipwise weigh --engine dask``.

The PSU x replicate factor table is built on the client by the in-memory
engine's own builders (:func:`~skipwise.weighting.replicates.jackknife_units`,
:func:`~skipwise.weighting.replicates.bootstrap_units`: the same PSU order, the
same ``numpy.random.default_rng(seed)`` draws), and each partition takes its
cases' factors by their global PSU code, so PSUs may span partitions.  The
response propensity model gathers the eligible cases' covariates when they fit
the memory budget.  :func:`weigh_on_cluster` runs the whole job and publishes
the weighted parts.
"""

from __future__ import annotations

import functools
import json
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path
from typing import Callable, Sequence

import numpy as np
import pandas as pd

from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError
from skipwise.scale import weigh_parts as wp
from skipwise.weighting.replicates import bootstrap_units, jackknife_units, stratum_fractions

__all__ = ["design_of", "propensity_step", "weigh_on_cluster", "refuse_unsupported", "REPLICATE_THREADS",
           "SINGLE_FILE_FORMS", "single_file_targets"]

#: Replicates whose passes the client keeps in flight at once.
REPLICATE_THREADS = 8


def design_of(plan, census: list) -> tuple[object, list]:
    """The replicate design (PSU x replicate table) and each partition's local → global PSU codes."""
    r = plan.replicates
    if r is None:
        return None, [None] * len(census)
    union = pd.concat([c.units for c in census], ignore_index=True).drop_duplicates(ignore_index=True)
    if r.strata is None and r.psu is not None:
        union = union.iloc[np.argsort(pd.factorize(union["psu"], sort=True)[0], kind="stable")]
        union = union.reset_index(drop=True)
    index = pd.MultiIndex.from_frame(union)
    unit_map = [index.get_indexer(pd.MultiIndex.from_frame(c.units)).astype(np.intp) for c in census]
    strata_codes, strata_values = pd.factorize(union["stratum"], sort=True)
    of_unit = strata_codes.astype(np.intp)
    n_strata = len(strata_values)
    f_h = np.zeros(n_strata)
    if r.fpc:
        col = r.fraction or plan.base_probability
        if any(c.fraction is None for c in census):
            raise SkipwiseError(Problem(code=ProblemCode.MISSING_COLUMN, category=Category.DATA, item=col,
                                        message=f"sampling-fraction column '{col}' (replicates.fpc) is not in the data"))
        merged = pd.concat([c.fraction for c in census]).groupby("stratum", sort=True).agg(
            lo=("lo", "min"), hi=("hi", "max"), bad=("bad", "sum"))
        merged = merged.reindex(strata_values)
        f_h = stratum_fractions(merged["lo"].to_numpy(float), merged["hi"].to_numpy(float), int(merged["bad"].sum()))
    if r.method == "jackknife":
        design = jackknife_units(of_unit, f_h, stratified=r.strata is not None, item=r.strata or r.psu, fpc=r.fpc)
    else:
        design = bootstrap_units(of_unit, f_h, count=r.count, seed=r.seed, item=r.strata or r.psu, fpc=r.fpc)
    return design, unit_map


def refuse_unsupported(plan, questionnaire=None) -> None:
    """What the dask engine cannot do with this plan, refused before any work.

    An interview split needs the share of items answered, so the questionnaire (as in memory).
    """
    if plan.dispositions.split is not None and questionnaire is None:
        from skipwise.weighting.pipeline import no_share_problem

        raise SkipwiseError(no_share_problem(plan))


# --- response propensity: the model matrix is gathered ----------------------------------------

def _eligible_covariates(state) -> tuple[pd.DataFrame, np.ndarray]:
    return state.x_prop, state.respondent[state.eligible]


def _eligible_of(state, w: np.ndarray) -> np.ndarray:
    return w[state.eligible]


def _full_of_eligible(state, values: np.ndarray, fill: float) -> np.ndarray:
    out = np.full(state.n, fill, dtype=values.dtype)
    out[state.eligible] = values
    return out


def _inverse(state, w: np.ndarray, p: np.ndarray) -> np.ndarray:
    return np.where(state.respondent, w / np.where(p > 0, p, 1.0), 0.0)


def propensity_step(chain, w: list, base: list, structure) -> tuple[list, object, list, list, str | None]:
    """The nonresponse step by a propensity model: the eligible cases' covariates gathered, fitted on the client."""
    from skipwise.weighting.propensity import fit_propensity, propensity_classes, propensity_design

    nr = chain.plan.nonresponse
    d = chain.d
    cols = len(nr.covariates) + 2
    need = chain.enc.eligible * cols * 16
    if need > chain.budget:
        from skipwise.scale.weigh import refuse_gather

        raise refuse_gather("the response propensity model (its covariates)", need, chain.budget)
    if structure is None:
        chain.note(f"propensity model: the covariates of the {chain.enc.eligible:,} eligible cases "
                   f"(about {need / 1e6:,.1f} MB) are gathered to the client and the model is fitted there")
    got = d.gather(d.on(_eligible_covariates))
    frame = pd.concat([g[0] for g in got])
    responded = np.concatenate([g[1] for g in got])
    x = propensity_design(frame, list(nr.covariates), categorical=nr.categorical)
    fw = None
    if structure is not None:
        b_rep = np.concatenate(d.gather(d.on(_eligible_of, base)))
        b_full = np.concatenate(d.gather(d.on(_eligible_of, chain.base)))
        fw = b_rep / b_full
    fit = fit_propensity(x, responded, fit_weights=fw)
    note = None
    if fit.separation is not None and fit.separation.separated:
        note = ("propensity model: " + fit.separation.describe("respondents", "nonrespondents")
                + " (their propensity is 1 and their weight is kept as it is)")
    bounds = np.concatenate([[0], np.cumsum([len(g[1]) for g in got])])

    def per_part(values: np.ndarray, fill: float) -> list:
        return [d.client.submit(_full_of_eligible, s, values[bounds[i]:bounds[i + 1]], fill, pure=False)
                for i, s in enumerate(d.states)]

    if nr.propensity_use == "inverse":
        return d.on(_inverse, w, per_part(fit.propensity, 0.0)), fit, [], [], note
    pc, labels = propensity_classes(fit.propensity, nr.propensity_classes)
    codes = per_part(pc.astype(np.intp), -1)
    sums = d.total(d.on(_prop_sums, w, codes, n_classes=len(labels)))
    from skipwise.weighting.adjust import class_factors

    cf = class_factors(sums, labels, step="nonresponse", min_kept=nr.min_respondents, max_factor=np.inf)
    out = d.on(_prop_apply, w, codes, factor_of_class=cf.factor_of_class)
    return out, fit, [cf.table], list(cf.collapses), note


def _prop_sums(state, w, codes, n_classes):
    return wp.step_sums(state, w, "nonresponse", n_classes, codes=codes)


def _prop_apply(state, w, codes, factor_of_class):
    return wp.step_apply(state, w, "nonresponse", factor_of_class, codes=codes)


# --- estimates with replicate standard errors: weighted sums per partition ---------------------

def _estimate_sums(part, state, plan, final: np.ndarray, reps: list, dtypes: dict[str, str] | None = None) -> dict:
    """Per estimate row: Σ w y and Σ w over valid respondents for the final and every replicate weight."""
    from skipwise.weighting.replicates import _estimate_columns

    est = plan.estimates
    frame = wp._read(part, [*est.means, *est.proportions], dtypes)
    if state.answered is not None:  # with a questionnaire: answered cells only, as weigh -q in memory
        frame = frame.assign(**{c: state.answered[c].to_numpy() for c in state.answered.columns
                                if c in frame.columns})
    rows, y, valid = _estimate_columns(frame, state.respondent, est.means, est.proportions, est.exclude_values)
    w = np.column_stack([final, *reps])
    v = valid.astype(float)
    num, den = (y * v).T @ w, v.T @ w
    n = (valid & (final > 0)[:, None]).sum(axis=0)
    out = {(r["variable"], r["category"], r["kind"]): (num[k], den[k], int(n[k])) for k, r in enumerate(rows)}
    for k, r in enumerate(rows):
        # a proportion's denominator is its variable's valid cases, also in partitions lacking the category
        if r["kind"] == "proportion":
            out[(r["variable"], "", "valid")] = (den[k], den[k], int(n[k]))
    return out


def _estimates(client, parts: list, dist, plan, final: list, reps: list, design,
               dtypes: dict[str, str] | None = None) -> pd.DataFrame:
    """:func:`skipwise.weighting.replicates.replicate_standard_errors` from merged weighted sums."""
    from skipwise.weighting.replicates import replicate_variance

    plan_future = client.scatter(plan, broadcast=True, hash=False)
    found = client.gather([client.submit(_estimate_sums, part, dist.states[i], plan_future, final[i],
                                         [r[i] for r in reps], dtypes, pure=False) for i, part in enumerate(parts)])
    merged: dict = {}
    for part in found:
        for key, (num, den, n) in part.items():
            if key in merged:
                a, b, m = merged[key]
                merged[key] = (a + num, b + den, m + n)
            else:
                merged[key] = (num, den, n)
    est = plan.estimates
    keys = [(name, "", "mean") for name in est.means if (name, "", "mean") in merged]
    for name in est.proportions:
        keys += sorted((k for k in merged if k[0] == name and k[2] == "proportion"), key=lambda k: k[1])
    columns = ["variable", "category", "kind", "n", "estimate", "se", "replicates", "method"]
    if not keys:
        return pd.DataFrame(columns=columns)
    totals = [merged[(k[0], "", "valid")] if k[2] == "proportion" else merged[k] for k in keys]
    num = np.array([merged[k][0] for k in keys])
    den = np.array([t[1] for t in totals])
    ratio = num / den
    table = pd.DataFrame([{"variable": k[0], "category": k[1], "kind": k[2]} for k in keys])
    table["n"] = np.array([t[2] for t in totals], dtype=np.int64)
    table["estimate"] = ratio[:, 0]
    table["se"] = np.sqrt(replicate_variance(ratio[:, 1:].T, design))
    table["replicates"] = design.count
    table["method"] = design.method
    return table


# --- the whole job -----------------------------------------------------------------------------

def _write_part(part, state, index: int, staging: str, columns: dict, labels: dict[str, str], meta=None,
                dtypes: dict[str, str] | None = None, forms: tuple[str, ...] = ("parquet",)) -> dict:
    """Read the partition whole, add the weight columns and write its part in each of ``forms``
    (``parquet``, ``csv``); returns the first part's name, rows and digest.

    ``meta`` and ``dtypes``: the whole file's metadata and column types of converted input.
    """
    from skipwise.io import get_meta, write_survey
    from skipwise.scale.classify import _sha
    from skipwise.scale.sources import read_part

    frame = read_part(part, meta, dtypes)
    from skipwise.weighting.outcomes import OUTCOME_NUMBERS, OUTCOME_VALUE_LABELS

    # the outcome category as its labelled number 1-8, as the in-memory engine delivers it
    added = {name: (pd.Series(np.asarray(state.outcome)).map(OUTCOME_NUMBERS).to_numpy(dtype=np.int64)
                    if values is None else values)
             for name, values in columns.items()}
    out = pd.concat([frame, pd.DataFrame(added, index=frame.index)], axis=1)
    meta = get_meta(frame)
    for col, label in labels.items():
        outcome = col.endswith("outcome")
        meta = meta.with_column(col, label=label, measure="nominal" if outcome else "scale",
                                value_labels=OUTCOME_VALUE_LABELS if outcome else None)
    for form in forms:
        write_survey(out, Path(staging) / f"part-{index:05d}.{form}", meta, overwrite=True)
    name = f"part-{index:05d}.{forms[0]}"
    return {"file": name, "rows": len(out), "sha256": _sha(Path(staging) / name)}


#: The single-file OUTs of the dask engine's weigh, and what each is written with (beside it: its Parquet).
SINGLE_FILE_FORMS = (".parquet", ".csv")


def single_file_targets(out: Path) -> list[Path]:
    """The files a single-file OUT means, as in memory: OUT, and for a CSV OUT the ``.parquet`` beside it."""
    return [out] + ([out.with_suffix(".parquet")] if out.suffix.lower() == ".csv" else [])


def _check_out(source, out: Path, overwrite: bool) -> None:
    if out.suffix.lower() in SINGLE_FILE_FORMS:
        from skipwise.publish import check_writable

        inputs = [Path(str(source))] if Path(str(source)).is_file() else []
        for target in single_file_targets(out):
            check_writable(target, overwrite=overwrite, inputs=inputs)
        return
    if out.suffix:
        raise SkipwiseError(Problem(code=ProblemCode.BAD_VALUE, category=Category.USAGE, file=str(out),
                                    message="the dask engine writes Parquet or CSV only: OUT names a folder (one "
                                            "Parquet part per partition), a .parquet or a .csv file",
                                    hint="name a folder, a .parquet or a .csv OUT, or use --engine memory for "
                                         f"a {out.suffix} file"))
    from skipwise.scale.classify import _check_parts_folder

    _check_parts_folder(out, overwrite)


def _publish(client, submit, source, out: Path, overwrite: bool,
             beside: Sequence[tuple[Path, Callable[[Path], None]]] = ()) -> None:
    """Write the weighted parts and publish them: a folder of parts, or one file (and its Parquet) joined
    by the client from the parts one at a time (:mod:`skipwise.scale.single`); all or nothing.

    ``beside``: further files (the workbook) as (path, writer of a temporary path), published with
    the data: with a single-file OUT in the same all-or-nothing step; with a folder OUT written
    first and renamed into place right after the folder, only if the folder was published.
    """
    from skipwise.publish import publish_files

    extra = [path for path, _ in beside]
    if out.suffix.lower() in SINGLE_FILE_FORMS:
        from skipwise.scale.convert import scratch_folder
        from skipwise.scale.single import join_csv, join_parquet

        targets = single_file_targets(out)
        forms = tuple(t.suffix.lower().lstrip(".") for t in targets)
        with scratch_folder(out) as scratch:
            written = client.gather(submit(str(scratch), forms))
            with publish_files([*targets, *extra], overwrite=overwrite) as temps:
                for form, tmp in zip(forms, temps):
                    names = [scratch / (Path(w["file"]).stem + "." + form) for w in written]
                    (join_parquet if form == "parquet" else join_csv)(names, tmp)
                for (_, write), tmp in zip(beside, temps[len(targets):]):
                    write(tmp)
        return
    from skipwise.publish import PackagePublisher
    from skipwise.scale.classify import PART_MANIFEST

    with publish_files(extra, overwrite=overwrite) as temps:
        for (_, write), tmp in zip(beside, temps):
            write(tmp)
        with PackagePublisher(out) as pub:
            written = client.gather(submit(str(pub.staging), ("parquet",)))
            listing = {"tool": "skipwise weigh --engine dask", "source": str(source), "outputs": written}
            (pub.staging / PART_MANIFEST).write_text(json.dumps(listing, indent=2), encoding="utf-8")
            pub.publish()


def weigh_on_cluster(source, plan, out: Path, *, client, parts: list, overwrite: bool = False, meta=None,
                     dtypes: dict[str, str] | None = None, note: Callable[[str], None] | None = None,
                     on_design: Callable[[int], None] | None = None, progress: Callable[[int], None] | None = None,
                     questionnaire=None, beside: Sequence[tuple[Path, Callable]] = ()):
    """Weigh every partition of ``source`` by ``plan`` on the cluster; write the weighted parts into ``out``.

    ``out`` is a folder (one Parquet part per partition), or one ``.parquet`` or ``.csv`` file (with,
    for a CSV, the ``.parquet`` beside it, as the in-memory engine writes), joined from the parts.

    ``meta`` and ``dtypes`` are the whole file's metadata and column types when the parts were
    converted from one SPSS, Stata, SAS or CSV file (:func:`skipwise.scale.convert.convert_to_parts`):
    every partition is read in those types and its part written with that metadata.
    ``questionnaire``: every partition is classified on its worker, as ``weigh -q`` classifies the
    file in memory; the plan's interview split uses each case's share of applicable items answered.
    ``beside``: (path, writer) pairs of further outputs made from the result, each writer called as
    ``writer(result, temporary_path)`` and published with the data (the workbook of ``weigh``).

    Returns a :class:`skipwise.scale.weigh.DaskWeighResult` (figures and tables for the
    workbook and the console; the weights stay in the parts).
    """
    from skipwise.generated import check_generated
    from skipwise.pipeline.steps import weight_labels
    from skipwise.scale.weigh import ClusterChain
    from skipwise.scale.weigh_prepare import prepare_on_cluster
    from skipwise.weighting.pipeline import STAGES
    from skipwise.weighting.weigh import _generated, planned_weight_columns

    import pyarrow.parquet as pq

    refuse_unsupported(plan, questionnaire)
    names = list(pq.ParquetFile(parts[0].path).schema_arrow.names)
    check_generated(planned_weight_columns(plan, names), names)
    out = Path(out)
    _check_out(source, out, overwrite)
    if questionnaire is not None:
        from skipwise.classify import check_columns
        from skipwise.scale.sources import Part, read_part

        check_columns(read_part(Part(parts[0].path, (), 0), meta, dtypes), questionnaire)  # columns only, no rows
    dist, enc = prepare_on_cluster(client, parts, plan, dtypes, questionnaire=questionnaire, meta=meta)
    chain = ClusterChain(dist, enc, plan, note=note)
    stages, result = chain.run()
    p = plan.prefix
    columns: dict[str, list | None] = {f"{p}outcome": None}
    for stage in STAGES:
        columns[f"{p}{stage}"] = stages[stage]
    design = enc.design
    if design is not None:
        if on_design is not None:
            on_design(design.count)
        width = max(3, len(str(design.count)))

        def replicate(r: int) -> list:
            base_r = dist.on(wp.scaled, chain.base, factors=design.unit_factors[:, r])
            return chain.run(base_r, structure=result.structure, detail=False)[0]["final"]

        # replicates are independent: several run at once, so their passes overlap on the cluster
        with ThreadPoolExecutor(max_workers=min(design.count, REPLICATE_THREADS)) as pool:
            running = [pool.submit(replicate, r) for r in range(design.count)]
            try:
                for r, job in enumerate(running):
                    try:
                        columns[f"{p}rep{r + 1:0{width}d}"] = job.result()
                    except SkipwiseError as err:
                        raise SkipwiseError(err.problems, headline=f"replicate {r + 1} of {design.count} "
                                                                   f"({design.method}) failed; collapse classes "
                                                                   f"or categories") from None
                    if progress is not None:
                        progress(r + 1)
            finally:
                for job in running:
                    job.cancel()
    check_generated([_generated(plan, c, "weight column") for c in columns], names)
    estimates = None
    if design is not None and plan.estimates is not None:
        reps = [v for k, v in columns.items() if k.startswith(f"{p}rep")]
        estimates = _estimates(client, parts, dist, plan, stages["final"], reps, design, dtypes)
    res = chain.result(stages, result, design, tuple(columns), estimates)
    labels = weight_labels(res)
    meta_future = client.scatter(meta, broadcast=True, hash=False) if meta is not None else None

    def submit(staging: str, forms: tuple[str, ...]) -> list:
        return [client.submit(_write_part, part, dist.states[i], i, staging,
                              {k: (None if v is None else v[i]) for k, v in columns.items()}, labels, meta_future,
                              dtypes, forms, pure=False) for i, part in enumerate(parts)]

    _publish(client, submit, source, out, overwrite,
             [(path, functools.partial(write, res)) for path, write in beside])
    return res
