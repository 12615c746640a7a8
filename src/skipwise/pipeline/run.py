"""``skipwise run``: the whole pipeline from one run plan, into one hand-over package.

Order: load the definitions (questionnaire, weighting and imputation plans) and
check that every column the weighting plan needs is in the data or the weighting
file, check every output path, then read, check, classify, join the interview
answers to the sample file, weigh, report, diagnose, impute and export.
Weighting comes before the report and the diagnostics so both can use the final
weight.  Every file is first written into a hidden staging folder
beside the package folder, under the package's lock; only when every step has
succeeded is the staging folder swapped in for the package
(:class:`skipwise.publish.PackagePublisher`), so a failed, interrupted or
killed run leaves the old package or the new one, never a mix.
"""

from __future__ import annotations

import datetime as dt
import time
from dataclasses import dataclass
from pathlib import Path
from typing import Callable

from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError
from skipwise.io.readers import READ_ONLY_FORMATS
from skipwise.io.stable import stamp_file
from skipwise.pipeline.manifest import StepRecord, build_manifest, file_record, manifest_text
from skipwise.pipeline.plan import RunPlan, load_run_plan
from skipwise.pipeline.reporting import Reporter, SilentReporter
from skipwise.pipeline import steps as S
from skipwise.publish import PackagePublisher, publish_file

__all__ = ["run_plan", "RunResult", "StepFailed", "planned_outputs", "STEPS"]

#: The steps in the order they run, with what each does.
STEPS: dict[str, str] = {
    "plan": "load the questionnaire and the weighting and imputation plans",
    "read": "read the data",
    "check": "check the questionnaire against the data",
    "classify": "give every cell its status",
    "join": "join the interview answers to the sample file by case id",
    "weigh": "compute outcome rates and weights",
    "report": "write the item nonresponse workbook",
    "diagnose": "diagnose the missingness mechanism",
    "impute": "impute in-universe item nonresponse",
    "export": "write the final data files and the codebook",
}


class StepFailed(SkipwiseError):
    """A step of the run failed; carries that step's problems and names the step."""

    def __init__(self, step: str, err: SkipwiseError):
        self.step = step
        super().__init__(err.problems, headline=f"run stopped at step '{step}' ({STEPS[step]})"
                         + (f": {err.headline}" if err.headline else ""))


@dataclass(frozen=True, kw_only=True)
class RunResult:
    """What a run wrote (role -> final path), its step records, the manifest and the run's state."""

    plan: RunPlan
    folder: Path
    files: dict[str, Path]
    steps: tuple[StepRecord, ...]
    manifest: dict
    state: S.RunState


def planned_outputs(plan: RunPlan, weighting_plan=None, imputation_plan=None) -> dict[str, str]:
    """Role -> file name (inside the package folder) of every file the run will write."""
    name = plan.output.name
    out: dict[str, str] = {}
    for fmt in plan.formats("status_columns"):
        out[f"data_{fmt}"] = f"{name}.{fmt}"
    for fmt in plan.formats("recoded"):
        out[f"coded_{fmt}"] = f"{name}_coded.{fmt}"
    out["faults"] = f"{name}_faults.csv"
    if plan.report is not None:
        out["item_report"] = "item_report.xlsx"
    if plan.diagnose is not None:
        out["diagnostics"] = "diagnostics.xlsx"
    if weighting_plan is not None:
        out["weighting_workbook"] = "weighting.xlsx"
        if plan.weighting_data is not None:
            stem, fmt = plan.weighting_data.stem, plan.weighting_data.suffix.lower().lstrip(".")
            if fmt not in READ_ONLY_FORMATS:  # SAS is read, not written: its weighted copy is Parquet only
                out["weighted_frame"] = f"{stem}_weighted.{fmt}"
            if fmt != "parquet":
                out["weighted_frame_parquet"] = f"{stem}_weighted.parquet"
    if imputation_plan is not None:
        fmt = plan.output.imputed_format
        fmt = plan.input_format() if fmt == "input" else fmt
        paths = S.imputation_paths(Path(f"{name}_imputed.{fmt}"), imputation_plan.spec.m, imputation_plan.output.form)
        for k, p in enumerate(paths):
            out[f"imputed_{k + 1}"] = p.name
    out["codebook_md"] = "codebook.md"
    out["codebook_html"] = "codebook.html"
    out["codebook_xml"] = "codebook.xml"
    out["manifest"] = "manifest.json"
    return out


_FILE_TEXT = {
    "data": "final data: every original column with labels and missing definitions, `<item>_status` columns, weights",
    "coded": "final data, recoded form: every non-answer cell of numeric items carries its status's special code",
    "faults": "routing faults, one row per cell, with the rule and its inputs (lists case ids)",
    "item_report": "item nonresponse workbook", "diagnostics": "missingness-mechanism diagnostics workbook",
    "weighting_workbook": "weighting diagnostics: outcome rates, weights by stage, estimates",
    "weighted_frame": "the weighting file (all sampled cases) with its weight columns",
    "imputed": "completed data (imputations) with `<item>_imp` flags and the weights",
    "codebook_md": "this codebook (Markdown)", "codebook_html": "this codebook (HTML)",
    "codebook_xml": "the codebook in the archive standard DDI-Codebook 2.5 (XML)",
    "manifest": "versions, plan, seeds, timings and the SHA-256 of every input and output",
}


def _describe(role: str) -> str:
    for key, text in _FILE_TEXT.items():
        if role == key or role.startswith(key + "_"):
            return text
    return ""


def check_names(plan: RunPlan, names: dict[str, str]) -> None:
    """Refuse a plan whose generated file names collide (e.g. ``output.name: item_report`` with
    ``status_columns: [xlsx]``) before anything is written; names are compared as a
    case-insensitive file system would."""
    by_name: dict[str, list[str]] = {}
    for role, name in names.items():
        by_name.setdefault(name.casefold(), []).append(role)
    problems: list[Problem] = []
    stem = plan.output.name
    if set(stem) & {"/", "\\", "\0"} or stem.startswith(".") or not stem.strip():
        problems.append(Problem(code=ProblemCode.BAD_VALUE, category=Category.USAGE, file=str(plan.file),
                                line=plan.line("output", "name"),
                                message=f"output.name {stem!r} must be a plain file name stem",
                                hint="leave out '/', '\\' and a leading '.'; the folder is output.folder"))
    problems += [Problem(code=ProblemCode.DUPLICATE_NAME, category=Category.USAGE, file=str(plan.file),
                        line=plan.line("output", "name"),
                        message=f"the package would hold two files named {names[roles[0]]!r} "
                                f"({' and '.join(_role_text(r) for r in roles)})",
                        hint="choose another output.name in the plan")
                for roles in by_name.values() if len(roles) > 1]
    if problems:
        raise SkipwiseError(problems, headline="the run plan's output file names are not usable (nothing "
                            "was written)" if len(problems) > 1 else None)


def _role_text(role: str) -> str:
    return role.replace("_", " ")


def _check_targets(plan: RunPlan, names: dict[str, str], inputs: list[Path]) -> None:
    folder = plan.output.folder
    problems = [Problem(code=ProblemCode.OUTPUT_IS_INPUT, category=Category.USAGE, file=str(folder / name),
                        message="this output would replace an input file",
                        hint="choose another output.folder or output.name in the plan")
                for name in names.values() if (folder / name).resolve() in inputs]
    problems += [Problem(code=ProblemCode.OUTPUT_IS_INPUT, category=Category.USAGE, file=str(p),
                         message="this input lies inside the package folder, which a run replaces whole",
                         hint="choose an output.folder that holds no input")
                 for p in inputs if folder.resolve() in p.parents]
    if problems:
        raise SkipwiseError(problems)


def _load_definitions(plan: RunPlan, st: S.RunState) -> None:
    from skipwise.questionnaire import load_questionnaire

    errors: list[Problem] = []
    for attr, loader, path in (
        ("q", load_questionnaire, plan.questionnaire),
        ("weighting_plan", _weighting_loader, plan.weighting_plan),
        ("imputation_plan", _imputation_loader, plan.imputation_plan),
    ):
        if path is None:
            continue
        try:
            setattr(st, attr, loader(path))
        except SkipwiseError as err:
            errors += err.problems
    if errors:
        raise SkipwiseError(errors)


def _check_weighting_columns(plan: RunPlan, st: S.RunState) -> None:
    """Every column the weighting plan needs is in the data or the weighting file (names only are read)."""
    if st.weighting_plan is None:
        return
    from skipwise.pipeline.join import check_weighting_columns, column_names

    data_cols = column_names(plan.data)
    weighting_cols = column_names(plan.weighting_data) if plan.weighting_data is not None else None
    check_weighting_columns(st.weighting_plan, data_cols, weighting_cols,
                            case_id=st.weighting_plan.case_id or st.q.case_id, data_file=plan.data,
                            weighting_file=plan.weighting_data)


def _weighting_loader(path: Path):
    from skipwise.weighting.plan import load_plan

    return load_plan(path)


def _imputation_loader(path: Path):
    from skipwise.impute.plan import load_plan

    return load_plan(path)


def _now() -> str:
    return dt.datetime.now(dt.timezone.utc).isoformat(timespec="seconds")


def run_plan(plan: RunPlan | str | Path, *, overwrite: bool = False, reporter: Reporter | None = None) -> RunResult:
    """Run every step of ``plan`` and write the hand-over package.

    Parameters
    ----------
    plan
        A :class:`RunPlan` or the path of a run plan file.
    overwrite
        Replace files of an earlier package; without it, every output in the way is
        reported in one error before anything runs.
    reporter
        Receives progress (default: silent).

    Raises
    ------
    SkipwiseError
        Plan problems (all at once, with lines), outputs in the way, or
        :class:`StepFailed` naming the step that failed.  Nothing is written
        in the package folder unless every step succeeded.
    """
    reporter = reporter or SilentReporter()
    if not isinstance(plan, RunPlan):
        plan = load_run_plan(plan)
    if plan.engine.kind == "auto":
        plan = resolve_auto_engine(plan, reporter)
    started = _now()
    records: list[StepRecord] = []
    st = S.RunState(plan=plan, targets={})
    t0 = time.perf_counter()
    reporter.step("plan", STEPS["plan"])
    try:
        _load_definitions(plan, st)
        _check_weighting_columns(plan, st)
    except SkipwiseError as err:
        raise StepFailed("plan", err) from None
    inputs = [("run_plan", plan.file), ("data", plan.data), ("questionnaire", plan.questionnaire),
              ("weighting_plan", plan.weighting_plan), ("weighting_data", plan.weighting_data),
              ("imputation_plan", plan.imputation_plan)]
    inputs = [(role, p) for role, p in inputs if p is not None]
    names = planned_outputs(plan, st.weighting_plan, st.imputation_plan)
    check_names(plan, names)
    _check_targets(plan, names, [p.resolve() for _, p in inputs])
    input_records = [file_record(role, p) for role, p in inputs]
    records.append(StepRecord(step="plan", status="done", seconds=time.perf_counter() - t0))

    folder = plan.output.folder
    with PackagePublisher(folder) as pub:  # takes OUT.lock and repairs what a crashed run left
        for note in pub.notes:
            reporter.info(f"note: {note}")
        pub.check_target(overwrite=overwrite, names=names.values())
        st.targets = {role: pub.staging / name for role, name in names.items()}
        if plan.engine.dask:
            from skipwise.pipeline.dask_run import dask_session

            with dask_session(plan, folder) as st.dask:
                _steps(st, reporter, records)
        else:
            _steps(st, reporter, records)
        when = S.fixed_time(plan)
        for role, path in st.targets.items():  # one fixed write time inside every data file and workbook
            if role != "manifest" and path.exists():
                stamp_file(path, when)
        t1 = time.perf_counter()
        outputs = [file_record(role, st.targets[role], name=names[role]) for role in names if role != "manifest"]
        seeds = {"imputation": st.imputation_plan.spec.seed if st.imputation_plan else None,
                 "replicates": (st.weighting_plan.replicates.seed if st.weighting_plan and st.weighting_plan.replicates
                                and st.weighting_plan.replicates.method != "jackknife" else None)}
        records.append(StepRecord(step="manifest", status="done", seconds=time.perf_counter() - t1))
        manifest = build_manifest(plan=plan.resolved(), inputs=input_records, outputs=outputs, steps=records,
                                  seeds=seeds, started=started, finished=_now(), summary=_summary(st))
        if plan.engine.dask:
            manifest["engine"] = {"kind": "dask", "partitions": len(st.dask.parts),
                                  "partition_rows": plan.engine.partition_rows}
        with publish_file(st.targets["manifest"], overwrite=True) as tmp:
            tmp.write_text(manifest_text(manifest), encoding="utf-8")
        pub.publish()  # every step succeeded: the package appears whole, or the old one stays
    for note in st.notes:
        reporter.info(f"note: {note}")
    return RunResult(plan=plan, folder=folder, files={r: folder / n for r, n in names.items()},
                     steps=tuple(records), manifest=manifest, state=st)


def _memory_steps(st: S.RunState) -> list[tuple[str, Callable | None]]:
    plan = st.plan
    return [
        ("read", S.read_step), ("check", S.check_step), ("classify", S.classify_step),
        ("join", S.join_step if st.weighting_plan is not None else None),
        ("weigh", S.weigh_step if st.weighting_plan is not None else None),
        ("report", S.report_step if plan.report is not None else None),
        ("diagnose", _diagnose if plan.diagnose is not None else None),
        ("impute", S.impute_step if st.imputation_plan is not None else None),
        ("export", _export),
    ]


def resolve_auto_engine(plan: RunPlan, reporter: Reporter) -> RunPlan:
    """``engine: auto``: the dask engine when the data would not fit the memory budget and the plan's
    outputs and inputs are ones the dask engine handles in the same form, else in memory; said on the
    console when the data are over the budget (as ``--engine auto`` does for the commands).

    The memory need is the commands' estimate (:func:`skipwise.cli.engine.data_size`, times their
    working factor) against ``$SKIPWISE_MEMORY_BUDGET`` or the memory available.
    """
    from dataclasses import replace

    from skipwise.cli.engine import WORKING_FACTOR, data_size, memory_budget

    need, budget = WORKING_FACTOR * data_size(plan.data), memory_budget()
    kind = "memory"
    if need > budget:
        size = f"the data need about {need / 1e9:,.1f} GB in memory (budget {budget / 1e9:,.1f} GB)"
        if plan.engine_blockers:
            reporter.info(f"engine: auto: {size}, but {plan.engine_blockers[0]}; using the in-memory engine")
        else:
            kind = "dask"
            reporter.info(f"engine: auto: {size}; using the dask engine (partitions on a Dask cluster)")
    return replace(plan, engine=replace(plan.engine, kind=kind), engine_blockers=())


def _dask_steps(st: S.RunState) -> list[tuple[str, Callable | None]]:
    """The same steps on the dask engine (skipwise.pipeline.dask_run); the plan loader refused
    what this version cannot do (skipwise.engine_spec.unsupported_steps)."""
    from skipwise.pipeline import dask_run as D

    plan = st.plan
    return [
        ("read", D.read_step), ("check", D.check_step), ("classify", D.classify_step),
        ("join", None if st.weighting_plan is None else D.join_step),
        ("weigh", None if st.weighting_plan is None else D.weigh_step),
        ("report", D.report_step if plan.report is not None else None),
        ("diagnose", D.diagnose_step if plan.diagnose is not None else None),
        ("impute", D.impute_step if st.imputation_plan is not None else None),
        ("export", D.export_step),
    ]


def _steps(st: S.RunState, reporter: Reporter, records: list[StepRecord]) -> None:
    todo = _dask_steps(st) if st.plan.engine.dask else _memory_steps(st)
    for name, fn in todo:
        if fn is None:
            records.append(StepRecord(step=name, status="skipped", seconds=0.0, detail="not in the plan"))
            continue
        reporter.step(name, STEPS[name])
        t0 = time.perf_counter()
        try:
            fn(st, reporter)
        except SkipwiseError as err:
            raise StepFailed(name, err) from None
        records.append(StepRecord(step=name, status="done", seconds=time.perf_counter() - t0))


def _diagnose(st: S.RunState, reporter: Reporter) -> None:
    from skipwise.pipeline.diagnose import diagnose_step

    st.diagnostics = diagnose_step(st.data, st.q, st.cl, st.plan, st.targets["diagnostics"], reporter)


def _export(st: S.RunState, reporter: Reporter) -> None:
    from skipwise.pipeline.codebook import codebook_blocks, publish_codebooks

    frame = meta = data_name = None
    for form, roles in (("columns", "data_"), ("recoded", "coded_")):
        for role in [r for r in st.targets if r.startswith(roles)]:
            fmt = role[len(roles):]
            out, out_meta = S.final_frame(st, form, fmt)
            S.write_data(out, st.targets[role], out_meta, reporter)
            if form == "columns" and frame is None:
                frame, meta, data_name = out, out_meta, st.targets[role].name
            reporter.info(f"wrote {st.targets[role].name}")
    # The codebook's weighted rates use the report's weight, so the two show the same numbers.
    weight_name, weight = S.report_weight(st)
    if weight_name is not None and weight is None:
        weight = S.nan_to_zero(st.data[weight_name])
    files = [(st.targets[r].name, _describe(r)) for r in st.targets]
    from skipwise.pipeline.codebook import package_input

    inp = package_input(st, frame, meta, data_name, weight_name if weight_name in frame.columns else None)
    blocks = codebook_blocks(st, frame, meta, files, weight, weight_name, inp=inp)
    publish_codebooks(st, blocks, inp)


def _summary(st: S.RunState) -> dict:
    if st.dask is not None:
        from skipwise.pipeline.dask_run import summary

        return summary(st)
    out: dict = {"cases": len(st.data), "items": len(st.q.items),
                 "file_timestamp": S.fixed_time(st.plan).isoformat(),
                 "check_errors": len(st.check.errors), "check_notes": len(st.check.notes),
                 "routing_faults": len(st.cl.faults)}
    if st.weigh is not None:
        out["respondents"] = int(st.weigh.prepared.respondent.sum())
        out["RR3"] = st.weigh.rates.get("RR3")
    if st.impute is not None:
        out["imputations"] = st.impute.m
    return out
