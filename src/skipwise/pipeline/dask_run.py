"""The steps of ``skipwise run`` on the dask engine (``engine: {kind: dask, ...}``, docs/scale.md).

Each step calls the same cluster functions as the single commands' dask branches
(:mod:`skipwise.scale`): the data stay in partitions on the workers and the client
holds counts and small tables.  The package holds the same files as the in-memory
run: the data file (one ``.parquet`` and/or ``.csv`` file, joined on the client
from the workers' parts one part at a time by :func:`skipwise.scale.single.join_parquet`
/ :func:`~skipwise.scale.single.join_csv`), the fault listing, the workbooks and the
codebooks, whose figures come from per-partition partial sums merged on the client
(:mod:`skipwise.scale.colstats`).  The in-memory engine is the audited reference:
the tests compare both on the same rows.
"""

from __future__ import annotations

import contextlib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Iterator

import numpy as np
import pandas as pd

from skipwise.errors import SkipwiseError
from skipwise.pipeline.reporting import Reporter

__all__ = ["DaskSession", "dask_session", "read_step", "check_step", "classify_step", "report_step", "export_step"]


@dataclass
class DaskSession:
    """What the dask steps of one run share: the client, a scratch folder and the partitions."""

    client: Any
    scratch: Path
    parts: list = field(default_factory=list)
    meta: Any = None                 # the whole file's metadata when it was converted to parts
    dtypes: dict | None = None
    rows: int = 0
    classified: Any = None           # skipwise.scale.classify.DaskClassification (counts merged)
    weighted: list = field(default_factory=list)   # the weighted parts, one per partition (same rows)
    head: Any = None                 # the data's columns, their types and metadata (no rows)
    report: Any = None               # skipwise.scale.report.ClusterReport
    notes: list[str] = field(default_factory=list)
    facts: Any = None                # with a separate weighting file: the interviews' ids, shares, answers


@contextlib.contextmanager
def dask_session(plan, beside: Path) -> Iterator[DaskSession]:
    """A client (the plan's scheduler, else a local cluster) and a scratch folder beside ``beside``."""
    from skipwise.scale import dask_client
    from skipwise.scale.convert import scratch_folder

    with scratch_folder(beside) as scratch, dask_client(plan.engine.scheduler) as client:
        yield DaskSession(client=client, scratch=scratch)


def _session(st) -> DaskSession:
    return st.dask


def _bar(reporter: Reporter, label: str, rows: int):
    return reporter.progress(label, max(rows, 1))


def read_step(st, reporter: Reporter) -> None:
    """The partitions of the data (a Parquet file, or one pass converting a .sav/.dta/.sas7bdat/.csv file)."""
    from skipwise.scale.convert import convert_to_parts, needs_conversion
    from skipwise.scale.sources import Part, parquet_dtypes, parquet_parts, read_part

    s = _session(st)
    plan = st.plan
    if st.weighting_plan is not None:
        _weighting_problems(st)
    if needs_conversion(plan.data):
        reporter.info(f"converting {plan.data.name} to Parquet parts of {plan.engine.partition_rows:,} rows "
                      "(one sequential pass)")
        folder = s.scratch / "input"
        folder.mkdir()
        conv = convert_to_parts(plan.data, folder, partition_rows=plan.engine.partition_rows)
        s.parts, s.meta, s.dtypes = conv.parts, conv.meta, conv.dtypes
    else:
        s.parts = parquet_parts(plan.data, plan.engine.partition_rows)
        s.dtypes = parquet_dtypes(s.parts)  # the whole file's types in every partition, as read in memory
    s.rows = int(sum(p.rows for p in s.parts))
    # No rows: the columns, their types and the metadata; the in-memory steps' name checks read these.
    st.data = s.head = read_part(Part(s.parts[0].path, (), 0), s.meta, s.dtypes)
    reporter.info(f"{plan.data.name}: {s.rows:,} cases, {st.data.shape[1]:,} columns "
                  f"({len(s.parts):,} partitions on the dask engine)")
    if plan.weighting_data is not None:
        _read_weighting_file(st, reporter)
    if st.imputation_plan is not None:
        from skipwise.impute.plan import check_plan

        check_plan(st.imputation_plan, st.q, st.data.columns)
    from skipwise.pipeline.outnames import check_run_columns

    check_run_columns(st)


def check_step(st, reporter: Reporter) -> None:
    from skipwise.pipeline.steps import check_outcome
    from skipwise.scale.check import check_on_cluster

    s = _session(st)
    with _bar(reporter, "checking", s.rows) as advance:
        st.check = check_on_cluster(s.parts, st.q, client=s.client, meta=s.meta, dtypes=s.dtypes,
                                    top=st.plan.check_top, progress=advance)
    check_outcome(st, reporter)


def classify_step(st, reporter: Reporter) -> None:
    """Classify every partition on the workers; the fault listing joined on the client, counts merged."""
    from skipwise.classify.hints import invalid_hint_of_counts
    from skipwise.pipeline.steps import classified_lines
    from skipwise.scale.classify import merged, run_parts

    s = _session(st)
    data_dir, fault_dir = s.scratch / "classified", s.scratch / "faults"
    data_dir.mkdir()
    fault_dir.mkdir()
    with _bar(reporter, "classifying", s.rows) as advance:
        ordered = run_parts(s.client, s.parts, st.q, data_dir, fault_dir, meta=s.meta, dtypes=s.dtypes,
                            part_format="parquet", fault_format="csv", progress=advance)
    s.classified = res = merged(ordered)
    # The parts are not kept: the export writes the final data (with the weights) and the fault
    # listing (in the in-memory order, item by item over the whole file) from the partitions again.
    for o in ordered:
        (data_dir / o.file).unlink(missing_ok=True)
        (fault_dir / o.faults_file).unlink(missing_ok=True)
    hint = invalid_hint_of_counts(res.counts, data=str(st.plan.data), questionnaire=str(st.plan.questionnaire))
    classified_lines(reporter, s.rows, len(st.q.items), res.counts.sum(axis=0), res.faults, hint)


def report_step(st, reporter: Reporter) -> None:
    from skipwise.pipeline.steps import fixed_time, report_weight
    from skipwise.rates import worst_lines
    from skipwise.scale.report import report_on_cluster

    s = _session(st)
    o = st.plan.report
    name, _ = report_weight(st)
    parts = s.parts
    made = bool(s.weighted) and name in st.weights.columns
    if made:
        # a weight the run made: read from the weighted parts (the data's columns and the weights, same rows)
        from skipwise.scale.sources import parquet_parts

        parts = [q for w in s.weighted for q in parquet_parts(w, 1 << 62)]  # one partition per weighted part
    with _bar(reporter, "counting", s.rows) as advance:
        s.report = res = report_on_cluster(
            parts, st.q, st.targets["item_report"], client=s.client, meta=s.meta, dtypes=s.dtypes, weight=name,
            by=tuple(o.by), case_ids=o.case_ids, top_items=o.top_items, top_patterns=o.top_patterns,
            fault_rows=o.fault_rows, min_base=st.plan.min_base, input_path=st.plan.data, overwrite=True,
            written=fixed_time(st.plan), progress=advance,
            blank_weight_zero=made)  # as the in-memory run: blank run-made weights count as 0
    first = res.counts
    weighted = first.wcounts is not None
    rates = first.rates.with_min_base(st.plan.min_base)
    reporter.info("highest item nonresponse rates" + (f" (weighted by {name})" if name else "") + ":")
    for line in worst_lines(rates, weighted=weighted):
        reporter.info(line)
    if weighted and first.zero_weight:
        reporter.info(f"{int(first.zero_weight):,} case(s) have weight 0 in {name}: counted in the unweighted "
                      "rates only (see the report's Overview)")


# --- export: the final data file and the codebooks ----------------------------------------------

@dataclass(frozen=True)
class _FinalPart:
    rows: int
    head: pd.DataFrame       # no rows: the columns and their types
    meta: Any
    rates: Any
    partial: dict


def final_part(part, q, meta, dtypes, index: int, folder: str, formats: tuple[str, ...], weight: str | None,
               min_base: int, weights_part: str | None = None, weight_columns: tuple[str, ...] = (),
               weight_meta=None, fault_folder: str | None = None) -> _FinalPart:
    """On a worker: one partition of the final data file (data + status columns), written in each
    format, with its codebook partial sums and item rates (weighted by ``weight`` when given)."""
    from skipwise.classify import classify
    from skipwise.classify.delivery import delivery_meta
    from skipwise.classify.export import with_status_columns
    from skipwise.io import get_meta, write_survey
    from skipwise.rates import item_rates
    from skipwise.scale.colstats import column_partials, listed_values
    from skipwise.scale.sources import read_part

    frame = read_part(part, meta, dtypes)
    cl = classify(frame, q)
    if fault_folder is not None:
        write_fault_chunks(cl, Path(fault_folder), index)
    out, out_meta = with_status_columns(frame, cl, delivery_meta(get_meta(frame), q, frame))
    if weights_part is not None:
        # the weighted part holds this partition's rows in the same order: its weight columns join by
        # position (the in-memory run joins by case id, which the check step found unique)
        import pyarrow.parquet as pq

        weights = pq.read_table(weights_part, columns=list(weight_columns)).to_pandas()
        if len(weights) != len(out):
            raise RuntimeError(f"weighted part {weights_part} holds {len(weights)} rows, the partition {len(out)}")
        out = pd.concat([out, weights.set_axis(out.index)], axis=1)
        out_meta = out_meta.merged(weight_meta)
    out.attrs = {}
    for fmt in formats:
        write_survey(out, Path(folder) / fmt / f"part-{index:05d}.{fmt}", out_meta, overwrite=True)
    # the codebook's weight exactly as skipwise.ddi.build reads it (blank weights are NaN there)
    w = pd.to_numeric(out[weight], errors="coerce").to_numpy(float) if weight is not None else None
    rates = item_rates(cl, w, min_base=min_base)
    partial = column_partials(out, q, listed_values(out, q, out_meta), w)
    return _FinalPart(rows=len(out), head=out.head(0), meta=out_meta, rates=rates, partial=partial)


def write_fault_chunks(cl, folder: Path, index: int) -> None:
    """This partition's routing faults, one CSV file per item (``<item number>-<partition>.csv``),
    each by the in-memory listing's own writer and header; the client joins them item by item."""
    import numpy as np

    from skipwise.classify.export import _fault_counts, _listing_columns
    from skipwise.classify.faultlist import FAULT_COLUMNS
    from skipwise.io.writers_table import write_csv_frames

    header = [_listing_columns(cl, FAULT_COLUMNS).get(c, c) for c in FAULT_COLUMNS]
    for j in np.flatnonzero(_fault_counts(cl)):  # as skipwise.classify.export.fault_listing_parts, one item each
        rows = cl.fault_listing_of(np.array([j]))
        write_csv_frames([rows.rename(columns=_listing_columns(cl, list(rows.columns)))],
                         folder / f"{j:05d}-{index:05d}.csv", header)


def join_fault_chunks(folder: Path, items: int, parts: int, target: Path, header: bytes) -> None:
    """The chunks of :func:`write_fault_chunks` as one listing: item by item, partitions in file order
    (the order of the in-memory listing), each chunk's header left out."""
    import shutil

    with open(target, "wb") as out:
        out.write(header)
        for j in range(items):
            for i in range(parts):
                chunk = folder / f"{j:05d}-{i:05d}.csv"
                if not chunk.exists():
                    continue
                with open(chunk, "rb") as src:
                    src.readline()  # the header (field names hold no line breaks)
                    shutil.copyfileobj(src, out, 1 << 20)
                chunk.unlink()


def _fault_header(st) -> bytes:
    from skipwise.classify.faultlist import FAULT_COLUMNS
    from skipwise.io.writers_table import _csv_line

    cid = st.q.case_id
    names = [cid if c == "case_id" and cid and cid != "case_id" and cid not in FAULT_COLUMNS else c
             for c in FAULT_COLUMNS]
    return _csv_line(names).encode("utf-8")


def _final_columns(st) -> list[str]:
    from skipwise.classify.export import STATUS_SUFFIX

    weights = list(st.weights.columns) if st.weights is not None else []
    return [*map(str, _session(st).head.columns), *(f"{n}{STATUS_SUFFIX}" for n in st.q.item_names), *weights]


def export_step(st, reporter: Reporter) -> None:
    from skipwise.pipeline.codebook import codebook_blocks, package_input, publish_codebooks
    from skipwise.pipeline.run import _describe
    from skipwise.pipeline.steps import _atomic, report_weight
    from skipwise.scale.colstats import merge_partials, summaries
    from skipwise.scale.single import join_csv, join_parquet

    s = _session(st)
    roles = [r for r in st.targets if r.startswith("data_")]
    formats = tuple(r[len("data_"):] for r in roles)
    folder = s.scratch / "final"
    for fmt in formats:
        (folder / fmt).mkdir(parents=True)
    # The codebook's weighted rates use the report's weight, so the two show the same numbers.
    weight_name, _ = report_weight(st)
    columns = _final_columns(st)
    weight = weight_name if weight_name in columns else None
    q_f, meta_f = s.client.scatter([st.q, s.meta], broadcast=True, hash=False)
    wcols = tuple(st.weights.columns) if st.weights is not None else ()
    faults = s.scratch / "fault-chunks"
    faults.mkdir()
    futures = [s.client.submit(final_part, p, q_f, meta_f, s.dtypes, i, str(folder), formats, weight,
                               st.plan.min_base, str(s.weighted[i]) if s.weighted else None, wcols, st.weight_meta,
                               str(faults), key=f"skipwise-run-final-{i}-{id(s)}", pure=False)
               for i, p in enumerate(s.parts)]
    from distributed import as_completed

    done: dict[str, _FinalPart] = {}
    with _bar(reporter, "writing", s.rows) as advance:
        for fut in as_completed(futures):
            done[fut.key] = fut.result()
            advance(done[fut.key].rows)
    ordered = [done[f.key] for f in futures]
    with _atomic(st.targets["faults"]) as tmp:  # the in-memory listing's bytes and order
        join_fault_chunks(faults, len(st.q.items), len(ordered), tmp, _fault_header(st))
    for role, fmt in zip(roles, formats):
        parts = [folder / fmt / f"part-{i:05d}.{fmt}" for i in range(len(ordered))]
        with _atomic(st.targets[role]) as tmp:  # one part at a time through the client
            (join_parquet if fmt == "parquet" else join_csv)(parts, tmp)
        for p in parts:
            p.unlink()
        reporter.info(f"wrote {st.targets[role].name}")
    partial, rates = ordered[0].partial, ordered[0].rates
    for o in ordered[1:]:
        partial = merge_partials(partial, o.partial)
        rates = rates + o.rates
    head, meta = ordered[0].head, ordered[0].meta
    data_name = st.targets[roles[0]].name
    files = [(st.targets[r].name, _describe(r)) for r in st.targets]
    inp = package_input(st, head, meta, data_name, weight, rows=s.rows, summaries=summaries(partial),
                        rates=rates.with_min_base(st.plan.min_base))
    blocks = codebook_blocks(st, head, meta, files, None, weight_name, inp=inp)
    publish_codebooks(st, blocks, inp)


def summary(st) -> dict:
    """The manifest's summary of a dask run (the in-memory run's keys)."""
    from skipwise.pipeline.steps import fixed_time

    s = _session(st)
    out: dict = {"cases": s.rows, "items": len(st.q.items), "file_timestamp": fixed_time(st.plan).isoformat(),
                 "engine": "dask", "partitions": len(s.parts), "check_errors": len(st.check.errors), "check_notes": len(st.check.notes),
                 "routing_faults": int(s.classified.faults)}
    if st.weigh is not None:
        out["respondents"] = int(st.weigh.totals["respondents"])
        out["RR3"] = st.weigh.rates.get("RR3")
    if st.impute is not None:
        out["imputations"] = st.impute.m
    return out


# --- weighting -----------------------------------------------------------------------------------

def _weighting_problems(st) -> None:
    """What the weighting step cannot do on the dask engine, refused right after the plan is loaded.

    The run always has its questionnaire, so the interview split (share answered) and the estimates
    (answered cells only) run on the partitions as in memory; what is left are the engine's own refusals.
    """
    from skipwise.scale.weigh_replicates import refuse_unsupported

    refuse_unsupported(st.weighting_plan, st.q)


def join_step(st, reporter: Reporter) -> None:
    """With a separate weighting file: the interviews' case ids, shares answered and estimate values
    gathered from the partitions, and the estimate variables the weighting file lacks joined to it
    on the client by case id (as in memory); else nothing to join."""
    from skipwise.pipeline.join import estimate_columns
    from skipwise.pipeline.steps import join_interviews

    if st.weighting_data is None:
        reporter.info("the data file is weighted itself: nothing to join")
        return
    s = _session(st)
    spec = st.weighting_plan
    case_id = spec.case_id or st.q.case_id
    names = set(map(str, s.head.columns))
    wanted = [c for c in estimate_columns(spec) if c in names]
    raw = [c for c in wanted if c not in st.weighting_data.columns]  # what join_answers takes from the data
    q_f, meta_f = s.client.scatter([st.q, s.meta], broadcast=True, hash=False)
    futures = [s.client.submit(interview_facts, p, q_f, meta_f, s.dtypes, case_id if case_id in names else None,
                               raw, wanted, pure=False) for p in s.parts]
    facts = s.client.gather(futures)  # partitions in file order
    s.facts = _Facts(ids=pd.concat([f.ids for f in facts], ignore_index=True),
                     share=pd.concat([f.share for f in facts], ignore_index=True),
                     answered=pd.concat([f.answered for f in facts], ignore_index=True))
    if case_id in names:
        join_interviews(st, s.facts.ids, reporter)
    else:
        st.joined, st.joined_columns = st.weighting_data, []


@dataclass(frozen=True)
class _Facts:
    """What the in-memory weigh step reads of the interviews, gathered: case ids (with the raw
    estimate columns the weighting file lacks), shares answered and answered estimate values."""

    ids: pd.DataFrame
    share: pd.Series
    answered: pd.DataFrame


class _Answered:
    """The part of a Classification that :func:`skipwise.pipeline.steps.answered_values` reads."""

    def __init__(self, values: pd.DataFrame):
        self.values = values

    def analysis_values(self, source=None) -> pd.DataFrame:
        return self.values


def interview_facts(part, q, meta, dtypes, case_id: str | None, raw: list[str], wanted: list[str]) -> _Facts:
    """On a worker, row-local: a partition's case ids with ``raw``, its cases' shares answered and the
    answered values of the estimate items ``wanted`` (NaN for every other status)."""
    from skipwise.classify import classify
    from skipwise.scale.sources import read_part

    frame = read_part(part, meta, dtypes)
    cl = classify(frame, q)
    values = cl.analysis_values(frame)
    ids = frame[[case_id, *raw]].reset_index(drop=True) if case_id else pd.DataFrame(index=range(len(frame)))
    return _Facts(ids=ids, share=cl.cases["share_answered"].reset_index(drop=True),
                  answered=values[[c for c in wanted if c in values.columns]].reset_index(drop=True))


def _read_weighting_file(st, reporter: Reporter) -> None:
    """The weighting file (every sampled case) read on the client, as the in-memory run reads it,
    when it and the gathered interview facts fit the gather budget; else a refusal with its line."""
    from skipwise.cli.engine import data_size
    from skipwise.errors import Category, Problem, ProblemCode
    from skipwise.io import read_survey
    from skipwise.pipeline.join import estimate_columns
    from skipwise.scale.weigh import GATHER_BUDGET_ENV, gather_budget

    s, plan = _session(st), st.plan
    need = data_size(plan.weighting_data) + 8 * s.rows * (2 + 2 * len(estimate_columns(st.weighting_plan)))
    budget = gather_budget()
    if need > budget:
        raise SkipwiseError(Problem(
            code=ProblemCode.BAD_VALUE, category=Category.USAGE, file=str(plan.file),
            line=plan.line("weighting", "data"), item="weighting.data",
            message=f"'engine: dask': the weighting file {plan.weighting_data.name} is weighed on the client, with "
                    f"the interviews' case ids, shares answered and estimate values: about {need / 1e6:,.1f} MB, "
                    f"more than the gather budget of {budget / 1e6:,.1f} MB",
            hint=f"raise {GATHER_BUDGET_ENV} (bytes) if the client has the memory, weigh the data file itself "
                 "(leave out weighting.data), or use engine: memory"))
    st.weighting_data = read_survey(plan.weighting_data)
    reporter.info(f"{plan.weighting_data.name} (weighting): {len(st.weighting_data):,} cases, read on the client "
                  f"(about {need / 1e6:,.1f} MB of the gather budget of {budget / 1e6:,.1f} MB with the "
                  "interviews' ids, shares and estimate values)")


def weigh_step(st, reporter: Reporter) -> None:
    """``weigh --engine dask`` on the run's partitions (the workbook on the client, the weights in
    parts); with a separate weighting file, the in-memory weighting of that file on the client."""
    if st.weighting_data is not None:
        _weigh_weighting_file(st, reporter)
        return
    from skipwise.io import SurveyMeta
    from skipwise.pipeline.steps import weigh_summary, weight_meta
    from skipwise.scale.weigh_replicates import weigh_on_cluster
    from skipwise.weighting.workbook import write_workbook

    s = _session(st)
    spec = st.weighting_plan
    out = s.scratch / "weighted"
    with contextlib.ExitStack() as stack:
        bar: dict = {}

        def on_design(count: int) -> None:
            bar["advance"] = stack.enter_context(reporter.progress("replicates", count))

        st.weigh = res = weigh_on_cluster(st.plan.data, spec, out, client=s.client, parts=s.parts, meta=s.meta,
                                          dtypes=s.dtypes, note=lambda text: reporter.info(f"note: {text}"),
                                          on_design=on_design, progress=lambda _done: bar["advance"](1),
                                          questionnaire=st.q)  # the split's shares, answered cells for estimates
    s.weighted = [out / f"part-{i:05d}.parquet" for i in range(len(s.parts))]
    missing = [p for p in s.weighted if not p.exists()]
    if missing:
        raise RuntimeError(f"the weighted parts are not where expected: {missing[0]}")
    write_workbook(res, st.targets["weighting_workbook"], overwrite=True)
    cols = list(res.weight_columns)
    st.weights = pd.DataFrame(columns=cols, dtype=float)  # names only: the weights stay in the parts
    st.weight_meta = weight_meta(res, SurveyMeta())
    weigh_summary(res, reporter)


def _weigh_weighting_file(st, reporter: Reporter) -> None:
    """The weighting file weighed on the client by the in-memory engine (the same function as the
    in-memory run), its weights matched to the interviews by case id there, then handed to each
    partition's worker, which writes the partition with its weights as a weighted part."""
    from skipwise.pipeline.steps import weigh_summary, weigh_weighting_file

    s = _session(st)
    f = s.facts
    weights = weigh_weighting_file(st, _Answered(f.answered), f.ids, f.share, s.head.columns, reporter)
    out = s.scratch / "weighted"
    out.mkdir()
    bounds = np.concatenate([[0], np.cumsum([p.rows for p in s.parts])])
    futures = []
    for i, p in enumerate(s.parts):  # partitions in file order: the gathered rows' order
        chunk = s.client.scatter(weights.iloc[bounds[i]:bounds[i + 1]].reset_index(drop=True), hash=False)
        futures.append(s.client.submit(weighted_part, p, s.meta, s.dtypes, chunk, str(out / f"part-{i:05d}.parquet"),
                                       pure=False))
    s.client.gather(futures)
    s.weighted = [out / f"part-{i:05d}.parquet" for i in range(len(s.parts))]
    st.weights = pd.DataFrame(columns=list(weights.columns), dtype=float)  # names only: the weights are in the parts
    weigh_summary(st.weigh, reporter)


def weighted_part(part, meta, dtypes, weights: pd.DataFrame, path: str) -> int:
    """On a worker: one partition with its weights (the same rows, in order) written as a Parquet part."""
    from skipwise.io import get_meta, write_survey
    from skipwise.scale.sources import read_part

    frame = read_part(part, meta, dtypes)
    if len(weights) != len(frame):
        raise RuntimeError(f"{len(weights)} rows of weights for a partition of {len(frame)} rows")
    own = get_meta(frame)
    out = pd.concat([frame, weights.set_axis(frame.index)], axis=1)
    out.attrs = {}
    write_survey(out, Path(path), own, overwrite=True)
    return len(out)


# --- diagnose and impute: the columns they need, gathered when they fit the budget ---------------

def _diagnose_columns(st) -> list[str]:
    """The data columns the diagnostics read: the classification's (case id, context, items) and the
    plan's weight, response and auxiliaries; every column when the auxiliaries are chosen from the file."""
    q, o = st.q, st.plan.diagnose
    names = [str(c) for c in _session(st).head.columns]
    if o.aux is None:
        return names  # the diagnostics choose their auxiliaries among every column
    wanted = {q.case_id, *q.context, *(c for it in q.items for c in it.columns),
              *(c for c in (o.weight, o.response) if c), *(o.aux or ()), *(o.add_aux or ())}
    return [c for c in names if c in wanted]


def _gathered(st, columns: list[str], weights: bool, step: str, key: str):
    """``columns`` of every partition (and the run's weights) as one frame on the client, or a refusal
    naming the plan's line when they would exceed the gather budget."""
    from skipwise.errors import Category, Problem, ProblemCode
    from skipwise.io.meta import get_meta, set_meta
    from skipwise.scale.sources import read_part
    from skipwise.scale.weigh import GATHER_BUDGET_ENV, gather_budget, refuse_gather

    s = _session(st)
    wcols = list(st.weights.columns) if weights and st.weights is not None else []
    need = 8 * s.rows * (len(columns) + len(wcols))  # 8 bytes a cell (text columns take more)
    budget = gather_budget()
    if need > budget:
        err = refuse_gather(f"the {step} step", need, budget).problems[0]
        raise SkipwiseError(Problem(
            code=ProblemCode.BAD_VALUE, category=Category.USAGE, file=str(st.plan.file),
            line=st.plan.line(key) or st.plan.line("engine"), item=key,
            message=f"'engine: dask': {err.message}: it works on the whole file in memory and would gather "
                    f"{len(columns) + len(wcols):,} column(s) of {s.rows:,} cases to the client",
            hint=f"raise {GATHER_BUDGET_ENV} (bytes) if the client has the memory"
                 + (", name fewer columns (diagnose.items, diagnose.aux)" if step == "diagnose" else "")
                 + f", turn the step off ({key}: false, or leave the key out), or use engine: memory"))
    frames = [read_part(p, s.meta, s.dtypes)[columns] for p in s.parts]  # one partition read at a time
    meta = get_meta(frames[0]) if frames else None
    data = pd.concat(frames, ignore_index=True)
    del frames
    if meta is not None:
        set_meta(data, meta.subset(data.columns))
    made = None
    if wcols:
        import pyarrow.parquet as pq

        made = pd.concat([pq.read_table(w, columns=wcols).to_pandas() for w in s.weighted], ignore_index=True)
    return data, made, need, budget


@contextlib.contextmanager
def _in_memory(st, reporter: Reporter, columns: list[str], weights: bool, step: str, key: str):
    """The in-memory step's view of the run: the gathered columns as ``st.data`` (classified on the
    client), the run's weights as ``st.weights``; the names-only view is put back afterwards."""
    from skipwise.classify import classify

    data, made, need, budget = _gathered(st, columns, weights, step, key)
    shown = ", ".join(columns[:8]) + (f" and {len(columns) - 8:,} more" if len(columns) > 8 else "")
    reporter.info(f"note: {step} runs in memory on the client: gathered {len(columns):,} column(s) of "
                  f"{len(data):,} cases ({shown})" + (f" and {made.shape[1]:,} weight column(s)" if made is not None
                                                      else "")
                  + f", about {need / 1e6:,.1f} MB of the gather budget of {budget / 1e6:,.1f} MB")
    head, old_weights, old_cl = st.data, st.weights, st.cl
    st.data = data
    if made is not None:
        st.weights = made
    st.cl = classify(data, st.q)
    try:
        yield
    finally:
        st.data, st.weights, st.cl = head, old_weights, old_cl


def diagnose_step(st, reporter: Reporter) -> None:
    """The in-memory diagnostics on the columns they need, gathered to the client (within the budget)."""
    from skipwise.pipeline.diagnose import diagnose_step as diagnose

    with _in_memory(st, reporter, _diagnose_columns(st), False, "diagnose", "diagnose"):
        st.diagnostics = diagnose(st.data, st.q, st.cl, st.plan, st.targets["diagnostics"], reporter)


def impute_step(st, reporter: Reporter) -> None:
    """The in-memory imputation on the whole data (its completed files hold every column) and the
    run's weights, gathered to the client (within the budget)."""
    from skipwise.pipeline.steps import impute_step as impute

    columns = [str(c) for c in _session(st).head.columns]
    with _in_memory(st, reporter, columns, True, "impute", "imputation"):
        impute(st, reporter)
