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
    report: Any = None               # skipwise.scale.report.ClusterReport
    notes: list[str] = field(default_factory=list)


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
    from skipwise.scale.sources import Part, parquet_parts, read_part

    s = _session(st)
    plan = st.plan
    if needs_conversion(plan.data):
        reporter.info(f"converting {plan.data.name} to Parquet parts of {plan.engine.partition_rows:,} rows "
                      "(one sequential pass)")
        folder = s.scratch / "input"
        folder.mkdir()
        with _bar(reporter, "converting", 0) as advance:
            conv = convert_to_parts(plan.data, folder, partition_rows=plan.engine.partition_rows,
                                    progress=lambda rows: advance(0))
        s.parts, s.meta, s.dtypes = conv.parts, conv.meta, conv.dtypes
    else:
        s.parts = parquet_parts(plan.data, plan.engine.partition_rows)
    s.rows = int(sum(p.rows for p in s.parts))
    # No rows: the columns, their types and the metadata; the in-memory steps' name checks read these.
    st.data = read_part(Part(s.parts[0].path, (), 0), s.meta, s.dtypes)
    reporter.info(f"{plan.data.name}: {s.rows:,} cases, {st.data.shape[1]:,} columns "
                  f"({len(s.parts):,} partitions on the dask engine)")
    if plan.weighting_data is not None:
        from skipwise.io import read_survey

        st.weighting_data = read_survey(plan.weighting_data)
        reporter.info(f"{plan.weighting_data.name} (weighting): {len(st.weighting_data):,} cases")
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
    from skipwise.pipeline.steps import _atomic
    from skipwise.scale.classify import merged, run_parts
    from skipwise.scale.single import join_csv

    s = _session(st)
    data_dir, fault_dir = s.scratch / "classified", s.scratch / "faults"
    data_dir.mkdir()
    fault_dir.mkdir()
    with _bar(reporter, "classifying", s.rows) as advance:
        ordered = run_parts(s.client, s.parts, st.q, data_dir, fault_dir, meta=s.meta, dtypes=s.dtypes,
                            part_format="parquet", fault_format="csv", progress=advance)
    s.classified = res = merged(ordered)
    with _atomic(st.targets["faults"]) as tmp:  # the in-memory listing's bytes, partition after partition
        join_csv([fault_dir / o.faults_file for o in ordered], tmp)
    for o in ordered:  # the classified parts are rewritten at export with the weights; not kept here
        (data_dir / o.file).unlink(missing_ok=True)
    shares = res.counts.sum(axis=0)
    total = max(int(shares.sum()), 1)
    reporter.info(f"{s.rows:,} cases x {len(st.q.items)} items; "
                  + ", ".join(f"{k} {100 * c / total:.1f}%" for k, c in shares.items() if c))
    reporter.info(f"{res.faults:,} routing faults (the fault list names case ids)")
    hint = invalid_hint_of_counts(res.counts, data=str(st.plan.data), questionnaire=str(st.plan.questionnaire))
    if hint:
        reporter.info(hint)


def report_step(st, reporter: Reporter) -> None:
    from skipwise.pipeline.steps import fixed_time, report_weight
    from skipwise.rates import worst_lines
    from skipwise.scale.report import report_on_cluster

    s = _session(st)
    o = st.plan.report
    name, _ = report_weight(st)
    with _bar(reporter, "counting", s.rows) as advance:
        s.report = res = report_on_cluster(
            s.parts, st.q, st.targets["item_report"], client=s.client, meta=s.meta, dtypes=s.dtypes, weight=name,
            by=tuple(o.by), case_ids=o.case_ids, top_items=o.top_items, top_patterns=o.top_patterns,
            fault_rows=o.fault_rows, min_base=st.plan.min_base, input_path=st.plan.data, overwrite=True,
            written=fixed_time(st.plan), progress=advance)
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
               min_base: int) -> _FinalPart:
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
    out, out_meta = with_status_columns(frame, cl, delivery_meta(get_meta(frame), q, frame))
    out.attrs = {}
    for fmt in formats:
        write_survey(out, Path(folder) / fmt / f"part-{index:05d}.{fmt}", out_meta, overwrite=True)
    # the codebook's weight exactly as skipwise.ddi.build reads it (blank weights are NaN there)
    w = pd.to_numeric(out[weight], errors="coerce").to_numpy(float) if weight is not None else None
    rates = item_rates(cl, w, min_base=min_base)
    partial = column_partials(out, q, listed_values(out, q, out_meta), w)
    return _FinalPart(rows=len(out), head=out.head(0), meta=out_meta, rates=rates, partial=partial)


def _final_columns(st) -> list[str]:
    from skipwise.classify.export import STATUS_SUFFIX

    return [*map(str, st.data.columns), *(f"{n}{STATUS_SUFFIX}" for n in st.q.item_names)]


def export_step(st, reporter: Reporter) -> None:
    from skipwise.ddi import ddi_bytes
    from skipwise.pipeline.codebook import codebook_blocks, codebook_html, codebook_markdown, package_input
    from skipwise.pipeline.run import _describe
    from skipwise.pipeline.steps import _atomic, report_weight
    from skipwise.publish import publish_file
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
    q_f, meta_f = s.client.scatter([st.q, s.meta], broadcast=True)
    futures = [s.client.submit(final_part, p, q_f, meta_f, s.dtypes, i, str(folder), formats, weight,
                               st.plan.min_base, key=f"skipwise-run-final-{i}-{id(s)}", pure=False)
               for i, p in enumerate(s.parts)]
    from distributed import as_completed

    done: dict[str, _FinalPart] = {}
    with _bar(reporter, "writing", s.rows) as advance:
        for fut in as_completed(futures):
            done[fut.key] = fut.result()
            advance(done[fut.key].rows)
    ordered = [done[f.key] for f in futures]
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
    with publish_file(st.targets["codebook_md"], overwrite=True) as tmp:
        tmp.write_text(codebook_markdown(blocks), encoding="utf-8")
    with publish_file(st.targets["codebook_html"], overwrite=True) as tmp:
        tmp.write_text(codebook_html(blocks, f"Codebook: {st.q.title or st.q.name}"), encoding="utf-8")
    with publish_file(st.targets["codebook_xml"], overwrite=True) as tmp:
        tmp.write_bytes(ddi_bytes(inp))


def summary(st) -> dict:
    """The manifest's summary of a dask run (the in-memory run's keys)."""
    from skipwise.pipeline.steps import fixed_time

    s = _session(st)
    out: dict = {"cases": s.rows, "items": len(st.q.items), "file_timestamp": fixed_time(st.plan).isoformat(),
                 "engine": "dask", "partitions": len(s.parts), "check_errors": len(st.check.errors), "check_notes": len(st.check.notes),
                 "routing_faults": int(s.classified.faults)}
    return out


def refuse(message: str, hint: str, st, key: tuple[str, ...]) -> SkipwiseError:
    from skipwise.errors import Category, Problem, ProblemCode

    return SkipwiseError(Problem(code=ProblemCode.BAD_VALUE, category=Category.USAGE, file=str(st.plan.file),
                                 line=st.plan.line(*key) or st.plan.line("engine"), message=message, hint=hint))



def join_step(st, reporter: Reporter) -> None:  # stage 2
    raise refuse("the weighting step has no dask engine in this version", "turn weighting off", st, ("weighting",))


weigh_step = join_step


def diagnose_step(st, reporter: Reporter) -> None:  # stage 3
    raise refuse("the diagnose step has no dask engine in this version", "turn diagnose off", st, ("diagnose",))


impute_step = diagnose_step
