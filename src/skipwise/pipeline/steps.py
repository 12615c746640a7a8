"""The steps of a run, and the glue the single commands share with it.

Each step reads what earlier steps left in a :class:`RunState` and writes its
files to the staging paths it is given (every write is atomic).  The helpers
``weigh_with_progress``, ``weight_meta``, ``imputed_frames`` and
``imputation_meta`` are also what ``skipwise weigh`` and ``skipwise impute`` call.
"""

from __future__ import annotations

import contextlib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Callable

import numpy as np
import pandas as pd

from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError, did_you_mean
from skipwise.io import SurveyMeta, get_meta
from skipwise.pipeline.plan import RunPlan
from skipwise.pipeline.reporting import Reporter, SilentReporter, classify_progress

__all__ = ["RunState", "weigh_with_progress", "weight_meta", "weight_labels", "imputation_paths",
           "imputed_frames", "imputation_meta", "read_step", "check_step", "classify_step", "join_step", "report_step",
           "weigh_step", "report_weight", "impute_step", "final_frame", "write_data", "check_outcome"]


@dataclass
class RunState:
    """What the steps of one run hand on to each other (mutable, private to the run)."""

    plan: RunPlan
    targets: dict[str, Path]              # role -> staging path of each output
    q: Any = None                         # Questionnaire
    weighting_plan: Any = None            # WeightingPlan
    imputation_plan: Any = None           # ImputePlan
    data: pd.DataFrame | None = None
    weighting_data: pd.DataFrame | None = None
    joined: pd.DataFrame | None = None    # the frame weighting runs on (sample file + joined answers)
    joined_columns: list[str] = field(default_factory=list)
    check: Any = None                     # DataCheck
    cl: Any = None                        # Classification
    weights: pd.DataFrame | None = None   # weight columns aligned with ``data`` (NaN: not in the weighting file)
    weight_meta: SurveyMeta | None = None
    weigh: Any = None                     # WeighResult
    impute: Any = None                    # SkipAwareResult
    diagnostics: Any = None               # DiagnosticsReport
    notes: list[str] = field(default_factory=list)
    dask: Any = None                      # skipwise.pipeline.dask_run.DaskSession with engine: dask


# --- glue shared with the single commands -------------------------------------------------------

def answered_values(cl, frame: pd.DataFrame, spec, *, case_id: str | None = None,
                    source: pd.DataFrame | None = None) -> pd.DataFrame | None:
    """The estimate items' answered values (NaN for every other status), aligned with ``frame``.

    ``source`` is the classified data when ``frame`` is another file (e.g. all sampled cases):
    the values are then matched by ``case_id``.
    """
    est = spec.estimates
    if est is None:
        return None
    values = cl.analysis_values(source)
    items = [c for c in (*est.means, *est.proportions) if c in values.columns and c in frame.columns]
    if not items:
        return None
    values = values[items]
    if source is not None:
        values = values.set_axis(source[case_id].to_numpy()).reindex(frame[case_id].to_numpy())
    return values.set_axis(frame.index)


def weigh_with_progress(frame: pd.DataFrame, spec, *, share_answered: pd.Series | None = None,
                        reporter: Reporter | None = None, estimate_values: pd.DataFrame | None = None):
    """:func:`skipwise.weighting.weigh.weigh` with a progress bar over the replicates."""
    from skipwise.weighting.weigh import weigh

    reporter = reporter or SilentReporter()
    with contextlib.ExitStack() as stack:
        bar: dict[str, Callable[[int], None]] = {}

        def on_design(count: int) -> None:
            bar["advance"] = stack.enter_context(reporter.progress("replicates", count))

        return weigh(frame, spec, share_answered=share_answered, on_design=on_design,
                     progress=lambda _done: bar["advance"](1), estimate_values=estimate_values)


def weight_labels(res) -> dict[str, str]:
    """Variable label of every weight column a weighting result adds."""
    p = res.plan.prefix
    labels = {
        f"{p}outcome": "Outcome category (1-8: I, P, R, NC, O, UH, UO, NE)",
        f"{p}base": "Base weight (inverse selection probability or given weight)",
        f"{p}eligibility": "Weight after unknown-eligibility adjustment",
        f"{p}nonresponse": "Weight after nonresponse adjustment",
        f"{p}calibrated": "Weight after calibration",
        f"{p}final": "Final weight (after trimming)",
    }
    return {col: labels.get(col, f"Replicate weight {col[len(p) + 3:]}") for col in res.weight_columns}


def weight_meta(res, meta: SurveyMeta | None = None) -> SurveyMeta:
    """``meta`` (default: the weighted frame's) with labels and measures of the weight columns."""
    meta = get_meta(res.data) if meta is None else meta.copy()
    from skipwise.weighting.outcomes import OUTCOME_VALUE_LABELS

    outcome = f"{res.plan.prefix}outcome"
    for col, label in weight_labels(res).items():
        meta = meta.with_column(col, label=label, measure="nominal" if col == outcome else "scale",
                                value_labels=OUTCOME_VALUE_LABELS if col == outcome else None)
    return meta


def imputation_paths(out: Path, m: int, form: str) -> list[Path]:
    """Where the completed data go: OUT itself (stacked, or M = 1), else OUT_1 ... OUT_M."""
    if form == "stacked" or m == 1:
        return [out]
    return [out.with_name(f"{out.stem}_{k}{out.suffix}") for k in range(1, m + 1)]


def imputed_frames(res, output) -> list[pd.DataFrame]:
    """The frames to write: one stacked frame, or one per imputation (flags appended)."""
    if output.form == "stacked":
        return [res.stacked(output.imputation_column, output.flag_suffix)]
    return [res.with_flags(i, output.flag_suffix) for i in range(res.m)]


def imputation_meta(frame: pd.DataFrame, res, output) -> SurveyMeta:
    """The input's metadata plus labels of the flag columns (and of the imputation number)."""
    from skipwise.impute.skipaware import FLAG_LABELS

    meta = get_meta(frame)
    for item in res.imputed[0].columns:
        meta = meta.with_column(f"{item}{output.flag_suffix}", label=f"Imputation flag of {item}",
                                value_labels=FLAG_LABELS, measure="nominal")
    if output.form == "stacked":
        meta = meta.with_column(output.imputation_column, label="Imputation number (1..M)", measure="nominal")
    return meta


# --- the steps of a run ---------------------------------------------------------------------------

def read_step(st: RunState, reporter: Reporter) -> None:
    from skipwise.io import read_survey

    st.data = read_survey(st.plan.data)
    reporter.info(f"{st.plan.data.name}: {len(st.data):,} cases, {st.data.shape[1]:,} columns")
    if st.plan.weighting_data is not None:
        st.weighting_data = read_survey(st.plan.weighting_data)
        reporter.info(f"{st.plan.weighting_data.name} (weighting): {len(st.weighting_data):,} cases")
    if st.imputation_plan is not None:  # names of the plan against the data now, not after the long steps
        from skipwise.impute.plan import check_plan

        check_plan(st.imputation_plan, st.q, st.data.columns)
    from skipwise.pipeline.outnames import check_run_columns

    check_run_columns(st)  # every generated column name, before any file is written


def check_step(st: RunState, reporter: Reporter) -> None:
    from skipwise.checkdata import check_data

    st.check = check_data(st.data, st.q, top=st.plan.check_top)
    check_outcome(st, reporter)


def check_outcome(st: RunState, reporter: Reporter) -> None:
    """Show the check's findings and stop the run when they say so (both engines)."""
    for row in st.check.to_rows():
        reporter.info(f"  {row['kind']:<5} {row['item'] or '-':<18} {row['finding']:<18} {row['detail']}")
    reporter.info(f"{len(st.check.errors)} error(s), {len(st.check.notes)} note(s)")
    ids = [p for p in st.check.errors if p.code is ProblemCode.DUPLICATE_CASE_ID
           or (p.item == st.q.case_id and p.code is ProblemCode.BAD_DATA)]
    if ids:  # whatever stop_on_error says: the package's files are matched and listed by case id
        raise SkipwiseError(ids, headline="the case ids must be present and unique (the run joins and lists "
                            "cases by id; check.stop_on_error cannot let this pass)")
    if not st.check.ok:
        if st.plan.stop_on_check_error:
            raise SkipwiseError(Problem(
                code=ProblemCode.BAD_DATA, category=Category.DATA, file=str(st.plan.file),
                line=st.plan.line("check", "stop_on_error"),
                message=f"the check found {len(st.check.errors)} error(s) and the plan says check.stop_on_error",
                hint="fix the questionnaire or the data, or set check: {stop_on_error: false}"))
        reporter.info("continuing (check.stop_on_error is false): values the questionnaire does not declare "
                      "are classified as 'invalid'")


def classify_step(st: RunState, reporter: Reporter) -> None:
    from skipwise.classify import classify

    with classify_progress(reporter, len(st.q.items), st.data.shape[0] * len(st.q.items)) as progress:
        st.cl = classify(st.data, st.q, progress=progress)
    from skipwise.classify.export import write_fault_listing

    with _atomic(st.targets["faults"]) as tmp:  # the same writer (and bytes) as `skipwise classify`
        n_faults = write_fault_listing(st.cl, tmp)
    from skipwise.classify.hints import invalid_hint

    hint = invalid_hint(st.cl, data=str(st.plan.data), questionnaire=str(st.plan.questionnaire))
    classified_lines(reporter, len(st.data), len(st.q.items), st.cl.counts().sum(axis=0), n_faults, hint)


def classified_lines(reporter: Reporter, cases: int, items: int, shares: pd.Series, faults: int,
                     hint: str | None) -> None:
    """The classify step's console lines: the statuses' shares, the faults, the invalid-value hint (both engines)."""
    total = max(int(shares.sum()), 1)
    reporter.info(f"{cases:,} cases x {items} items; "
                  + ", ".join(f"{s} {100 * c / total:.1f}%" for s, c in shares.items() if c))
    reporter.info(f"{faults:,} routing faults (the fault list names case ids)")
    if hint:
        reporter.info(hint)


def report_weight(st: RunState) -> tuple[str | None, np.ndarray | None]:
    """The weight of the package's rates: ``report.weight`` (a data column or a weight the run made),
    else the final weight when the run weighted, else none.  Blank weights count as 0."""
    o = st.plan.report
    name = o.weight if o is not None else None
    made = st.weights if st.weights is not None else pd.DataFrame(index=st.data.index)
    if name is None and st.weigh is not None:
        name = f"{st.weighting_plan.prefix}final"
    if name is None:
        return None, None
    if name in made.columns:
        return name, nan_to_zero(made[name])
    if name in st.data.columns:
        return name, None  # the report reads and checks the data column itself
    weights = list(made.columns)
    raise SkipwiseError(Problem(
        code=ProblemCode.MISSING_COLUMN, category=Category.USAGE, file=str(st.plan.file),
        line=st.plan.line("report", "weight"), item=name,
        message=f"report weight '{name}' is neither a column of the data nor a weight the run made",
        hint=did_you_mean(name, [*map(str, st.data.columns), *weights]) or
        (f"weights made by the run: {', '.join(weights[:6])}" if weights else "name a column of the data file")))


def report_step(st: RunState, reporter: Reporter) -> None:
    from skipwise.rates import item_rates, worst_lines
    from skipwise.report import write_item_report

    o = st.plan.report
    name, w = report_weight(st)
    write_item_report(st.data, st.q, st.targets["item_report"], classification=st.cl, weight=name, by=o.by,
                      case_ids=o.case_ids, top_items=o.top_items, top_patterns=o.top_patterns,
                      fault_rows=o.fault_rows, min_base=st.plan.min_base, weights=w,
                      input_path=st.plan.data, overwrite=True, written=fixed_time(st.plan))
    if name is not None and w is None:
        w = nan_to_zero(st.data[name])
    rates = item_rates(st.cl, w, min_base=st.plan.min_base)
    reporter.info("highest item nonresponse rates" + (f" (weighted by {name})" if name else "") + ":")
    for line in worst_lines(rates, weighted=w is not None):
        reporter.info(line)
    if w is not None and (w == 0).any():
        reporter.info(f"{int((w == 0).sum()):,} case(s) have weight 0 in {name}: counted in the unweighted "
                      "rates only (see the report's Overview)")


def join_step(st: RunState, reporter: Reporter) -> None:
    """Join the estimate variables the weighting file lacks from the interviews, by case id."""
    if st.weighting_data is None:
        st.joined = st.data
        return
    join_interviews(st, st.data, reporter)


def join_interviews(st: RunState, data: pd.DataFrame, reporter: Reporter) -> None:
    """``st.joined``: the weighting file with the estimate variables it lacks from ``data`` (the
    interviews, or on the dask engine their case ids and those columns), by case id; both engines."""
    from skipwise.pipeline.join import join_answers

    spec = st.weighting_plan
    case_id = spec.case_id or st.q.case_id
    st.joined, st.joined_columns = join_answers(st.weighting_data, data, spec, case_id,
                                                weighting_file=str(st.plan.weighting_data))
    if st.joined_columns:
        matched = int(st.weighting_data[case_id].isin(data[case_id]).sum())
        reporter.info(f"joined {', '.join(st.joined_columns)} from {st.plan.data.name} to "
                      f"{st.plan.weighting_data.name} by {case_id}: {matched:,} of {len(st.joined):,} cases matched")
    else:
        reporter.info("the weighting file holds every variable the weighting plan names: nothing to join")


def weigh_step(st: RunState, reporter: Reporter) -> None:
    from skipwise.weighting.workbook import write_workbook

    spec = st.weighting_plan
    if st.weighting_data is not None:
        st.weights = weigh_weighting_file(st, st.cl, st.data, st.cl.cases["share_answered"], st.data.columns,
                                          reporter).set_axis(st.data.index)
        weigh_summary(st.weigh, reporter)
        return
    # Estimates use answered cells only: never invalid values, off-route answers or codes.
    values = answered_values(st.cl, st.data, spec)
    st.weigh = res = weigh_with_progress(st.data, spec, share_answered=st.cl.cases["share_answered"],
                                         reporter=reporter, estimate_values=values)
    write_workbook(res, st.targets["weighting_workbook"], overwrite=True)
    st.weights = res.data[list(res.weight_columns)]
    st.weight_meta = weight_meta(res, SurveyMeta())
    weigh_summary(res, reporter)


def weigh_weighting_file(st: RunState, cl, source: pd.DataFrame, share: pd.Series, data_columns,
                         reporter: Reporter) -> pd.DataFrame:
    """Weigh a separate weighting file (``st.joined``: every sampled case) and return its weights for
    the data file's cases (:func:`sample_weights`); both engines.

    ``source`` holds the data file's case ids (and, in memory, every column), ``share`` each of its
    cases' share of applicable items answered (same rows), ``cl`` the classification whose
    ``analysis_values(source)`` gives the answered values of the estimate items.
    """
    from skipwise.weighting.workbook import write_workbook

    spec = st.weighting_plan
    frame = st.joined
    case_id = spec.case_id or st.q.case_id
    if case_id not in frame.columns or case_id not in set(map(str, data_columns)):
        raise SkipwiseError(Problem(
            code=ProblemCode.MISSING_COLUMN, category=Category.DATA, item=case_id, file=str(spec.file),
            message="the case id column must be in both the data file and the weighting file",
            hint="set case_id in the weighting plan to the id the two files share"))
    shares = frame[case_id].map(pd.Series(np.asarray(share), index=source[case_id].to_numpy()))
    # Estimates use answered cells only: never invalid values, off-route answers or codes.
    values = answered_values(cl, frame, spec, case_id=case_id, source=source)
    st.weigh = res = weigh_with_progress(frame, spec, share_answered=shares, reporter=reporter,
                                         estimate_values=values)
    write_workbook(res, st.targets["weighting_workbook"], overwrite=True)
    return sample_weights(st, res, case_id, source[case_id], data_columns, reporter)


def sample_weights(st: RunState, res, case_id: str, data_ids: pd.Series, data_columns, reporter: Reporter
                   ) -> pd.DataFrame:
    """A separate weighting file's weights for the data file's cases, matched by case id.

    Writes the weighted weighting file (as given, plus its weights) where the plan asks for it,
    sets ``st.weight_meta`` and returns the weight columns and the weighting variables the data
    file lacks (e.g. an age band made for a margin), one row per id of ``data_ids`` (blank where
    the weighting file lacks the case).  Used by both engines.
    """
    from skipwise.pipeline.derived import derived_columns, derived_meta

    spec = st.weighting_plan
    cols = list(res.weight_columns)
    written = res.data.drop(columns=st.joined_columns, errors="ignore")  # the weighting file as given, plus its weights
    for role in ("weighted_frame", "weighted_frame_parquet"):
        if role in st.targets:
            write_data(written, st.targets[role], weight_meta(res), reporter)
    extra = derived_columns(spec, res.data, data_columns)
    by_id = res.data.set_index(case_id)[cols + extra]
    if by_id.index.has_duplicates:
        raise SkipwiseError(Problem(code=ProblemCode.DUPLICATE_CASE_ID, category=Category.DATA, item=case_id,
                                    file=str(st.plan.weighting_data),
                                    message="case ids repeat in the weighting file: weights cannot be joined"))
    weights = by_id.reindex(data_ids.to_numpy()).reset_index(drop=True)
    missing = int(weights[cols[-1]].isna().sum())
    if missing and missing == len(weights):
        raise SkipwiseError(Problem(
            code=ProblemCode.BAD_DATA, category=Category.DATA, item=case_id, file=str(st.plan.weighting_data),
            message="no case id of the data file is in the weighting file",
            hint="both files must hold the same ids, stored the same way (numbers or text)"))
    if missing:
        st.notes.append(f"{missing:,} case(s) of the data file are not in the weighting file: their weights are blank")
    st.weight_meta = weight_meta(res, SurveyMeta())
    if extra:
        st.weight_meta = st.weight_meta.merged(derived_meta(spec, res.data, extra, st.plan.weighting_data.name))
    return weights


def weigh_summary(res, reporter: Reporter) -> None:
    """The weighting step's console lines (both engines)."""
    from skipwise.weighting.workbook import summary_rows

    for name, value in summary_rows(res):
        if name in ("respondents (weighted cases)", "sum of final weights", "Kish design effect (final)",
                    "response rate RR3 (unweighted)"):
            reporter.info(f"{name}: {value:,.4f}" if isinstance(value, float) else f"{name}: {value}")
    for note in res.chain.notes:
        reporter.info(f"note: {note}")


def impute_step(st: RunState, reporter: Reporter) -> None:
    from skipwise.impute.skipaware import impute_skipaware

    spec = st.imputation_plan
    with reporter.progress("imputations", spec.spec.m) as advance:
        st.impute = res = impute_skipaware(st.data, st.q, spec.spec, progress=advance)
    meta = imputation_meta(st.data, res, spec.output)
    frames = imputed_frames(res, spec.output)
    if st.weights is not None:  # analysts need the weights beside each completed file
        meta = meta.merged(st.weight_meta)
        reps = len(frames[0]) // max(len(st.data), 1)
        w = pd.concat([st.weights] * reps, ignore_index=True) if reps > 1 else st.weights
        frames = [pd.concat([f, w.set_axis(f.index)], axis=1) for f in frames]
    for k, frame in enumerate(frames):
        write_data(frame, st.targets[f"imputed_{k + 1}"], meta, reporter)
    reporter.info(f"{res.m} imputation(s), seed {res.seed}; statuses filled: {', '.join(res.statuses)}")
    for note in res.notes:
        reporter.info(f"note: {note}")


def final_frame(st: RunState, form: str, fmt: str) -> tuple[pd.DataFrame, SurveyMeta]:
    """The data with status columns (or recoded) and the weight columns joined by case id."""
    from skipwise.classify.delivery import delivery_meta
    from skipwise.classify.export import recoded_copy, with_status_columns

    # levels from the items; labels from the questionnaire where the file has none (a CSV start)
    meta = delivery_meta(get_meta(st.data), st.q, st.data)
    if form == "columns":
        frame, meta = with_status_columns(st.data, st.cl, meta)
    else:
        frame, meta = recoded_copy(st.data, st.cl, fmt, meta)
    if st.weights is not None:
        clash = [c for c in st.weights.columns if c in frame.columns]
        if clash:
            raise SkipwiseError(Problem(code=ProblemCode.DUPLICATE_NAME, item=clash[0],
                                        file=str(st.weighting_plan.file),
                                        message=f"weight column(s) {clash[:5]} already exist in the data",
                                        hint="set output.prefix in the weighting plan to another prefix"))
        frame = pd.concat([frame, st.weights.set_axis(frame.index)], axis=1)
        meta = meta.merged(st.weight_meta)
    frame.attrs = {}
    return frame, meta


def write_data(frame: pd.DataFrame, path: Path, meta: SurveyMeta, reporter: Reporter) -> None:
    """Write a data file atomically; format adaptations become notes, pandas' column-insert
    performance hints (wide files with replicate weights) are not shown."""
    import warnings

    from skipwise.io import MetadataWarning, write_survey

    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", MetadataWarning)
        warnings.simplefilter("ignore", pd.errors.PerformanceWarning)
        write_survey(frame, path, meta, overwrite=True)
    for w in caught:
        if issubclass(w.category, MetadataWarning):
            reporter.info(f"note: {str(w.message).replace(str(path.parent) + '/', '')}")


@contextlib.contextmanager
def _atomic(path: Path):
    from skipwise.io.atomic import atomic_output

    with atomic_output(path, overwrite=True) as tmp:
        yield tmp


def fixed_time(plan: RunPlan):
    """The write time put inside the package's files: the plan's ``output.timestamp``, else the
    data file's own modification time (so a rerun on the same data gives the same bytes)."""
    from skipwise.io.stable import parse_timestamp, timestamp_of

    if plan.output.timestamp is not None:
        return parse_timestamp(plan.output.timestamp)
    return timestamp_of(plan.data)


def nan_to_zero(values: pd.Series) -> np.ndarray:
    """Weights as floats, blanks as 0 (cases outside the weighting file carry no weight)."""
    return pd.to_numeric(values, errors="coerce").fillna(0.0).to_numpy(dtype=float)
