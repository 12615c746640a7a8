"""The run plan (YAML): which files ``skipwise run`` reads, which steps it runs, what it writes.

The keys are documented in ``docs/run-plan.md``.  The plan is validated like
the questionnaire file: every problem is collected and reported in one error,
each with its line; an unknown key gets the nearest valid key; paths are
relative to the plan file's folder, and a missing input file is reported with
its key and line.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Mapping

from skipwise.engine_spec import EngineSpec, parse_engine, unsupported_steps
from skipwise.errors import Category, ProblemCode, ProblemList, did_you_mean
from skipwise.io.readers import SAS_OUTPUT_REASON, SUPPORTED_EXTENSIONS
from skipwise.questionnaire.yamlread import LineDict, LineList, is_version, load_yaml_text, read_text_file
from skipwise.questionnaire.model import STUDY_KEYS

__all__ = ["RunPlan", "ReportOptions", "DiagnoseOptionsSpec", "OutputOptions", "load_run_plan",
           "loads_run_plan", "TOP_KEYS", "PLAN_FORMAT", "FORMATS"]

PLAN_FORMAT = 1
TOP_KEYS = ("format", "data", "questionnaire", "min_base", "check", "report", "diagnose", "weighting",
            "imputation", "output", "study", "engine")
#: Output formats of the final data file; ``input`` is the data file's own format.
FORMATS = ("input", "sav", "zsav", "dta", "csv", "xlsx", "parquet")

# Kinds of value: bool, int, float, str, names (list of str), floats (list of numbers), values
# (list of str or numbers), formats (list of FORMATS), path (input file), folder (output folder).
CHECK_KEYS = {"stop_on_error": "bool", "top": "int"}
REPORT_KEYS = {"weight": "str", "by": "names", "case_ids": "bool", "top_items": "int", "top_patterns": "int",
               "fault_rows": "int"}
DIAGNOSE_KEYS = {"items": "names", "aux": "names", "add_aux": "names", "categorical": "names", "little_items": "names",
                 "weight": "str", "response": "str", "responded": "values", "sensitivity": "str",
                 "threshold": "float", "deltas": "floats", "alpha": "float", "adjust": "str", "low_rate": "float",
                 "high_rate": "float", "auc_weak": "float", "auc_strong": "float"}
WEIGHTING_KEYS = {"plan": "path", "data": "path"}
IMPUTATION_KEYS = {"plan": "path"}
STUDY_PLAN_KEYS = {key: "text" for key in STUDY_KEYS}
OUTPUT_KEYS = {"folder": "folder", "name": "str", "status_columns": "formats", "recoded": "formats",
               "imputed_format": "format", "timestamp": "timestamp"}


@dataclass(frozen=True, kw_only=True)
class ReportOptions:
    """Options of the item report step (as ``skipwise report``)."""

    weight: str | None = None
    by: tuple[str, ...] = ()
    case_ids: bool = True
    top_items: int = 12
    top_patterns: int = 20
    fault_rows: int = 100_000


@dataclass(frozen=True, kw_only=True)
class DiagnoseOptionsSpec:
    """Options of the diagnose step (as ``skipwise diagnose``); None means the command's default."""

    items: tuple[str, ...] | None = None
    aux: tuple[str, ...] | None = None
    add_aux: tuple[str, ...] | None = None
    categorical: tuple[str, ...] | None = None
    little_items: tuple[str, ...] | None = None
    weight: str | None = None
    response: str | None = None
    responded: tuple[object, ...] | None = None
    sensitivity: str | None = None
    threshold: float | None = None
    deltas: tuple[float, ...] | None = None
    alpha: float = 0.05
    adjust: str = "holm"
    low_rate: float = 0.05
    high_rate: float = 0.40
    auc_weak: float = 0.60
    auc_strong: float = 0.70


@dataclass(frozen=True, kw_only=True)
class OutputOptions:
    """Where the hand-over package goes and in which formats the final data file is written."""

    folder: Path
    name: str
    status_columns: tuple[str, ...] = ("input", "parquet")
    recoded: tuple[str, ...] = ()
    imputed_format: str = "input"
    timestamp: str | None = None   # ISO date-time written inside the files (default: the data file's mtime)


@dataclass(frozen=True, kw_only=True)
class RunPlan:
    """A validated run plan; every path is absolute (resolved against the plan's folder)."""

    file: Path
    data: Path
    questionnaire: Path
    output: OutputOptions
    stop_on_check_error: bool = False
    check_top: int = 5
    report: ReportOptions | None = field(default_factory=ReportOptions)
    diagnose: DiagnoseOptionsSpec | None = field(default_factory=DiagnoseOptionsSpec)
    weighting_plan: Path | None = None
    weighting_data: Path | None = None
    imputation_plan: Path | None = None
    min_base: int = 30   # minimum unweighted D for a rate to be ranked (common practice, no source)
    study: Mapping[str, str] = field(default_factory=dict)   # overrides the questionnaire's study block key by key
    engine: EngineSpec = field(default_factory=EngineSpec)   # where classify, check and report compute
    #: With ``engine: auto``: why this plan cannot run on the dask engine (its outputs or inputs), if so.
    engine_blockers: tuple[str, ...] = ()
    lines: Mapping[tuple, int] = field(default_factory=dict)

    def line(self, *path: str) -> int | None:
        """Plan-file line of a key path, or of its nearest known parent."""
        p = tuple(path)
        while p:
            if p in self.lines:
                return self.lines[p]
            p = p[:-1]
        return None

    def input_format(self) -> str:
        return self.data.suffix.lower().lstrip(".")

    def formats(self, which: str) -> tuple[str, ...]:
        """Concrete formats of ``status_columns`` or ``recoded`` (``input`` replaced, no repeats)."""
        chosen = getattr(self.output, which)
        return tuple(dict.fromkeys(self.input_format() if f == "input" else f for f in chosen))

    def resolved(self) -> dict[str, Any]:
        """The plan with defaults filled in and absolute paths, as plain JSON-ready values."""
        def plain(obj: Any) -> Any:
            if obj is None or isinstance(obj, (bool, int, float, str)):
                return obj
            if isinstance(obj, Path):
                return str(obj)
            if isinstance(obj, (tuple, list)):
                return [plain(v) for v in obj]
            return {k: plain(v) for k, v in vars(obj).items()}

        return {
            "format": PLAN_FORMAT, "file": str(self.file), "data": str(self.data),
            "questionnaire": str(self.questionnaire), "min_base": self.min_base,
            "check": {"stop_on_error": self.stop_on_check_error, "top": self.check_top},
            "report": plain(self.report) if self.report is not None else False,
            "diagnose": plain(self.diagnose) if self.diagnose is not None else False,
            "weighting": None if self.weighting_plan is None else
            {"plan": str(self.weighting_plan), "data": str(self.weighting_data or self.data)},
            "imputation": None if self.imputation_plan is None else {"plan": str(self.imputation_plan)},
            "output": plain(self.output),
            "engine": plain(self.engine),
        }


class _Reader:
    def __init__(self, file: Path):
        self.file = file
        self.base = file.resolve().parent
        self.problems = ProblemList(file=str(file))
        self.lines: dict[tuple, int] = {}

    def add(self, code: ProblemCode, message: str, line: int | None, hint: str | None = None,
            category: Category = Category.DEFINITION) -> None:
        self.problems.add(code, message, line=line, hint=hint, category=category)

    def section(self, doc: LineDict, key: str, allowed: Mapping[str, str] | tuple[str, ...]) -> LineDict | None:
        """The mapping under ``key`` (None if absent), its keys checked against ``allowed``."""
        if key not in doc or doc[key] is None:
            return None
        value, line = doc[key], doc.key_line(key)
        if not isinstance(value, LineDict):
            self.add(ProblemCode.BAD_VALUE, f"'{key}' must be a mapping of keys to values", line,
                     f"valid keys: {', '.join(allowed)}")
            return None
        self.keys(value, tuple(allowed), f"'{key}'", (key,))
        return value

    def keys(self, d: LineDict, allowed: tuple[str, ...], what: str, path: tuple) -> None:
        for key, line in getattr(d, "duplicate_keys", []):
            self.add(ProblemCode.DUPLICATE_NAME, f"key '{key}' appears twice in {what}", line, "keep one of them")
        for key in d:
            self.lines[(*path, str(key))] = d.key_line(key)
            if key not in allowed:
                hint = did_you_mean(str(key), allowed) or f"valid keys: {', '.join(allowed)}"
                self.add(ProblemCode.UNKNOWN_KEY, f"unknown key '{key}' in {what}", d.key_line(key), hint)

    def values(self, d: LineDict | None, schema: Mapping[str, str], where: str) -> dict[str, Any]:
        """Every known key of ``d`` converted by its kind; bad values are recorded as problems."""
        out: dict[str, Any] = {}
        for key, kind in schema.items():
            if d is None or key not in d or d[key] is None:
                continue
            v = d[key]
            if kind in ("str", "path", "folder", "names") and isinstance(d, LineDict):
                # names and paths are the text written (YAML 1.2 rule): `weight: 2024` is "2024"
                v = d.text(key) if not isinstance(v, list) else _texts(v)
            got = self.value(v, kind, f"{where}.{key}" if where else key, d.value_mark(key).line)
            if got is not None:
                out[key] = got
        return out

    def value(self, v: Any, kind: str, what: str, line: int) -> Any:
        def bad(expected: str, hint: str | None = None) -> None:
            self.add(ProblemCode.BAD_VALUE, f"'{what}' must be {expected}, found {v!r}", line, hint)

        number = isinstance(v, (int, float)) and not isinstance(v, bool)
        if kind == "bool":
            return v if isinstance(v, bool) else bad("true or false")
        if kind == "int":
            return v if isinstance(v, int) and not isinstance(v, bool) and v >= 0 else bad("a whole number >= 0")
        if kind == "float":
            return float(v) if number else bad("a number")
        if kind == "str":
            return v.strip() if isinstance(v, str) and v.strip() else bad("a name")
        if kind == "timestamp":  # an unquoted ISO date may load as a date: keep its ISO text
            import datetime as _dt

            if isinstance(v, (_dt.date, _dt.datetime)):
                return v.isoformat()
            return v.strip() if isinstance(v, str) and v.strip() else bad('an ISO date-time, e.g. "2026-06-30T12:00:00"')
        if kind == "text":
            return str(v).strip() if (isinstance(v, str) or number) and str(v).strip() else bad("a single text")
        if kind in ("path", "folder"):
            if not isinstance(v, str) or not v.strip():
                return bad("a file path" if kind == "path" else "a folder path")
            path = Path(v.strip()).expanduser()
            path = (path if path.is_absolute() else self.base / path).resolve()
            if kind == "path" and not path.is_file():
                self.add(ProblemCode.FILE_NOT_FOUND, f"'{what}': file not found: {path}", line,
                         f"paths are relative to the plan's folder {self.base}", Category.USAGE)
                return None
            if kind == "folder" and path.exists() and not path.is_dir():
                self.add(ProblemCode.BAD_VALUE, f"'{what}': {path} exists and is not a folder", line)
                return None
            return path
        if kind == "format":
            got = self.value(v, "formats", what, line) if isinstance(v, str) else bad("one format name")
            return got[0] if got else None
        items = list(v) if isinstance(v, (list, LineList)) else [v]
        if kind == "names":
            if all(isinstance(x, str) and x.strip() for x in items):
                return tuple(x.strip() for x in items)
            return bad("a name or a list of names", "e.g. [district, sex]")
        if kind == "floats":
            if all(isinstance(x, (int, float)) and not isinstance(x, bool) for x in items):
                return tuple(float(x) for x in items)
            return bad("a number or a list of numbers")
        if kind == "values":
            if all(isinstance(x, (int, float, str)) and not isinstance(x, bool) for x in items):
                return tuple(items)
            return bad("a value or a list of values")
        if kind == "formats":
            formats = []
            for x in items:
                f = str(x).strip().lower().lstrip(".")
                if f not in FORMATS:
                    self.add(ProblemCode.BAD_VALUE, f"'{what}': unknown format {x!r}", line,
                             did_you_mean(f, FORMATS) or f"valid formats: {', '.join(FORMATS)}")
                else:
                    formats.append(f)
            return tuple(formats)
        raise AssertionError(kind)  # pragma: no cover - schema typo

    def need_file(self, doc: LineDict, key: str, what: str, hint: str) -> Path | None:
        if key not in doc:
            self.add(ProblemCode.MISSING_KEY, f"missing '{key}' ({what})", doc.line, hint)
            return None
        return self.value(doc[key], "path", key, doc.value_mark(key).line)

    def switchable(self, doc: LineDict, key: str, schema: Mapping[str, str]) -> tuple[bool, dict[str, Any]]:
        """A step that runs by default: ``key: false`` turns it off, a mapping sets its options."""
        if doc.get(key) is False:
            self.lines[(key,)] = doc.key_line(key)
            return False, {}
        if key in doc and doc[key] is True:
            return True, {}
        return True, self.values(self.section(doc, key, schema), schema, key)


def loads_run_plan(text: str, file: str | Path) -> RunPlan:
    """Validate plan ``text`` as if read from ``file`` (whose folder anchors relative paths)."""
    file = Path(file)
    r = _Reader(file)
    doc = load_yaml_text(text, str(file))
    if not isinstance(doc, LineDict):
        r.add(ProblemCode.BAD_VALUE, "the plan must be a mapping with 'format', 'data', 'questionnaire' "
              "and 'output'", 1, "see docs/run-plan.md")
        r.problems.raise_if_any()
    r.keys(doc, TOP_KEYS, "the plan", ())
    if not is_version(doc.get("format"), PLAN_FORMAT):
        r.add(ProblemCode.FORMAT_VERSION, f"format must be {PLAN_FORMAT}, found {doc.get('format')!r}",
              doc.key_line("format") if "format" in doc else 1, f"write 'format: {PLAN_FORMAT}' at the top")
    data = r.need_file(doc, "data", "the survey data file", "e.g. data: interviews.sav")
    if data is not None and data.suffix.lower() not in SUPPORTED_EXTENSIONS:
        r.add(ProblemCode.FILE_FORMAT, f"'data': {data.name} is not a supported survey file", doc.value_mark("data").line,
              f"use one of {', '.join(SUPPORTED_EXTENSIONS)}")
    questionnaire = r.need_file(doc, "questionnaire", "the questionnaire file", "e.g. questionnaire: survey.yaml")

    min_base = r.values(doc, {"min_base": "int"}, "").get("min_base", 30)
    check = r.values(r.section(doc, "check", CHECK_KEYS), CHECK_KEYS, "check")
    report_on, report = r.switchable(doc, "report", REPORT_KEYS)
    diagnose_on, diagnose = r.switchable(doc, "diagnose", DIAGNOSE_KEYS)
    if diagnose.get("adjust", "holm") not in ("holm", "bh", "none"):
        r.add(ProblemCode.BAD_VALUE, f"'diagnose.adjust' must be holm, bh or none, found {diagnose['adjust']!r}",
              r.lines.get(("diagnose", "adjust")), did_you_mean(diagnose["adjust"], ("holm", "bh", "none")))
    weighting = r.values(r.section(doc, "weighting", WEIGHTING_KEYS), WEIGHTING_KEYS, "weighting")
    if "weighting" in doc and isinstance(doc["weighting"], LineDict) and "plan" not in doc["weighting"]:
        r.add(ProblemCode.MISSING_KEY, "'weighting' needs 'plan' (the weighting plan file)", doc.key_line("weighting"),
              "e.g. weighting: {plan: weights.yaml}")
    if weighting.get("data") is not None and weighting["data"].suffix.lower() not in SUPPORTED_EXTENSIONS:
        r.add(ProblemCode.FILE_FORMAT, f"'weighting.data': {weighting['data'].name} is not a supported survey file",
              r.lines.get(("weighting", "data")), f"use one of {', '.join(SUPPORTED_EXTENSIONS)}")
    imputation = r.values(r.section(doc, "imputation", IMPUTATION_KEYS), IMPUTATION_KEYS, "imputation")
    study = r.values(r.section(doc, "study", STUDY_PLAN_KEYS), STUDY_PLAN_KEYS, "study")
    if "imputation" in doc and isinstance(doc["imputation"], LineDict) and "plan" not in doc["imputation"]:
        r.add(ProblemCode.MISSING_KEY, "'imputation' needs 'plan' (the imputation plan file)",
              doc.key_line("imputation"), "e.g. imputation: {plan: impute.yaml}")
    out_raw = r.section(doc, "output", OUTPUT_KEYS)
    if "output" not in doc:
        r.add(ProblemCode.MISSING_KEY, "missing 'output' (where the hand-over package goes)", doc.line,
              "e.g. output: {folder: package}")
    out = r.values(out_raw, OUTPUT_KEYS, "output")
    if out_raw is not None and "folder" not in out_raw:
        r.add(ProblemCode.MISSING_KEY, "'output' needs 'folder'", out_raw.line, "e.g. folder: package")
    if "status_columns" in out and not out["status_columns"]:
        r.add(ProblemCode.BAD_VALUE, "'output.status_columns' needs at least one format",
              r.lines.get(("output", "status_columns")), "e.g. [input, parquet]")
    if "timestamp" in out:
        from skipwise.io.stable import parse_timestamp

        try:
            parse_timestamp(out["timestamp"])
        except ValueError:
            r.add(ProblemCode.BAD_VALUE, f"'output.timestamp' must be an ISO date or date-time, found "
                  f"{out['timestamp']!r}", r.lines.get(("output", "timestamp")), 'e.g. timestamp: "2026-06-30T12:00:00"')
    if data is not None and "name" in out and out["name"] != Path(out["name"]).name:
        r.add(ProblemCode.BAD_VALUE, "'output.name' is a file stem, not a path", r.lines.get(("output", "name")),
              "e.g. name: lake-survey-2026")
    if data is not None and data.suffix.lower() in (".sas7bdat", ".xpt"):
        keys = [("status_columns", ("input", "parquet")), ("recoded", ())]
        if imputation.get("plan") is not None:
            keys.append(("imputed_format", "input"))
        for key, default in keys:
            chosen = out.get(key, default)
            if "input" in ((chosen,) if isinstance(chosen, str) else chosen):
                r.add(ProblemCode.FILE_FORMAT, f"'output.{key}': 'input' would be SAS ({data.name}): "
                      f"{SAS_OUTPUT_REASON}", r.lines.get(("output", key)) or (out_raw.line if out_raw else doc.line),
                      f"name the formats, e.g. output: {{{key}: " + ("dta}" if key == "imputed_format"
                                                                    else "[dta, parquet]}"))
    engine, blockers = _engine(r, doc, report_on, diagnose_on, weighting, imputation, out, data)
    r.problems.raise_if_any(headline=f"{len(r.problems)} problem(s) in run plan {file}")

    assert data is not None and questionnaire is not None
    output = OutputOptions(folder=out["folder"], name=out.get("name", data.stem),
                           status_columns=out.get("status_columns", ("input", "parquet")),
                           recoded=out.get("recoded", ()), imputed_format=out.get("imputed_format", "input"),
                           timestamp=out.get("timestamp"))
    return RunPlan(
        file=file.resolve(), data=data, questionnaire=questionnaire, output=output,
        stop_on_check_error=check.get("stop_on_error", False), check_top=check.get("top", 5),
        report=ReportOptions(**report) if report_on else None,
        diagnose=DiagnoseOptionsSpec(**diagnose) if diagnose_on else None,
        weighting_plan=weighting.get("plan"), weighting_data=weighting.get("data"),
        imputation_plan=imputation.get("plan"), min_base=min_base, study=study, lines=dict(r.lines),
        engine=engine, engine_blockers=blockers,
    )


def _engine(r: _Reader, doc: LineDict, report_on: bool, diagnose_on: bool, weighting: dict, imputation: dict,
            out: dict, data: Path | None) -> tuple[EngineSpec, tuple[str, ...]]:
    """The ``engine`` key (skipwise.engine_spec), and the steps and outputs the dask engine cannot do.

    With ``engine: dask`` these are problems of the plan; with ``engine: auto`` they are returned
    (the reasons the run stays in memory whatever the data's size: auto never changes the form of
    the output, DESIGN section 7).
    """
    if "engine" not in doc:
        return EngineSpec(), ()
    raw = doc["engine"]
    line = doc.key_line("engine")
    r.lines[("engine",)] = line
    key_line = (lambda key: raw.key_line(key) if key in raw else line) if isinstance(raw, LineDict) else \
        (lambda key: line)
    if isinstance(raw, LineDict):
        for key in raw:
            r.lines[("engine", str(key))] = raw.key_line(key)
    spec = parse_engine(raw, line=line, key_line=key_line,
                        add=lambda code, message, at, hint=None: r.add(code, message, at, hint))
    if spec.kind == "memory":
        return spec, ()
    found: list[tuple] = []

    def add(code, message: str, at, hint=None) -> None:
        found.append((code, message, at, hint))
    steps = ["classify", "check"] + (["report"] if report_on else []) + (["diagnose"] if diagnose_on else [])
    steps += (["weigh"] if weighting.get("plan") is not None else []) + \
        (["impute"] if imputation.get("plan") is not None else [])
    for step in unsupported_steps(spec, steps):
        key = {"weigh": "weighting", "impute": "imputation"}.get(step, step)
        add(ProblemCode.BAD_VALUE, f"'engine: {spec.kind}': the step '{step}' has no dask engine in this "
              "version", r.lines.get((key,)) or line,
              f"turn it off ({key}: false, or leave the key out) or use engine: memory")
    readable = (".parquet", ".sav", ".zsav", ".dta", ".sas7bdat", ".csv")  # skipwise.cli.engine.DASK_INPUTS
    if data is not None and data.suffix.lower() not in readable:
        add(ProblemCode.FILE_FORMAT, f"'engine: {spec.kind}' reads {', '.join(readable)} data, not "
              f"{data.suffix or 'a file without a suffix'}", r.lines.get(("data",)) or line,
              "convert the file to Parquet first, or use engine: memory")
    own = data.suffix.lower().lstrip(".") if data is not None else "parquet"
    chosen = [own if f == "input" else f for f in out.get("status_columns", ("input", "parquet"))]
    formats = [f for f in dict.fromkeys(chosen) if f not in ("parquet", "csv")]
    if formats:
        add(ProblemCode.FILE_FORMAT, f"'engine: {spec.kind}' writes Parquet or CSV only, and "
              f"'output.status_columns' names {', '.join(formats)}",
              r.lines.get(("output", "status_columns")) or line, "e.g. status_columns: [parquet]")
    if out.get("recoded"):
        add(ProblemCode.FILE_FORMAT, f"'engine: {spec.kind}' writes the columns form only",
              r.lines.get(("output", "recoded")) or line, "leave out 'output.recoded'")
    if spec.kind == "auto":
        return spec, tuple(message.replace("'engine: auto'", "the dask engine") for _, message, _, _ in found)
    for problem in found:
        r.add(*problem)
    return spec, ()


def load_run_plan(path: str | Path) -> RunPlan:
    """Read and validate a run plan file.

    Raises
    ------
    SkipwiseError
        Carrying every problem of the plan (file, line, what is wrong, how to fix it).
    """
    path = Path(path)
    return loads_run_plan(read_text_file(path), path)


def _texts(v: list) -> list:
    """The entries of a list as the texts written (lists and mappings inside are kept as they are)."""
    if not isinstance(v, LineList):
        return v
    return [v.text(i) if not isinstance(x, (list, dict)) and v.text(i) is not None else x for i, x in enumerate(v)]
