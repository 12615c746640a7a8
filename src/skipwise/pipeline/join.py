"""Joining the interview answers to the sample file before weighting, and the plan-time check of its columns.

Weighting runs on every sampled case (the weighting file), while the answers the
estimates need are in the interview file.  The run joins the estimate variables
the weighting file lacks from the interview file by case id (a left join: every
sampled case stays, nonrespondents get blanks).  Design variables (dispositions,
base weights, classes, covariates, margins, strata, PSUs) must be in the
weighting file itself: an interview-only column would be blank for every
nonrespondent.  :func:`check_weighting_columns` finds every column that is in
neither file before any step runs, reading only the files' column names.
"""

from __future__ import annotations

from pathlib import Path

import pandas as pd

from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError, did_you_mean

__all__ = ["weighting_columns", "estimate_columns", "column_names", "check_weighting_columns", "join_answers"]


def estimate_columns(spec) -> list[str]:
    """Estimate variables of a weighting plan (means, then proportions), without repeats."""
    est = spec.estimates
    return [] if est is None else list(dict.fromkeys((*est.means, *est.proportions)))


def weighting_columns(spec) -> dict[str, str]:
    """Every data column a weighting plan names, with its role (design variables first)."""
    out: dict[str, str] = {spec.dispositions.column: "disposition column"}
    for col, role in ((spec.base_probability, "selection probability"), (spec.base_weight, "base weight")):
        if col:
            out.setdefault(col, role)
    for col in spec.eligibility_classes or ():
        out.setdefault(col, "eligibility class")
    nr = spec.nonresponse
    if nr is not None:
        for col in nr.classes:
            out.setdefault(col, "nonresponse class")
        for col in nr.covariates:
            out.setdefault(col, "propensity covariate")
    cal = spec.calibration
    if cal is not None:
        for col in (*cal.margins, *cal.totals):
            out.setdefault(col, "calibration variable")
    rep = spec.replicates
    if rep is not None:
        for col, role in ((rep.psu, "replicate PSU"), (rep.strata, "replicate stratum")):
            if col:
                out.setdefault(col, role)
    for col in estimate_columns(spec):
        out.setdefault(col, "estimate variable")
    return out


def column_names(path: Path) -> list[str]:
    """Column names of a survey file, read from its header or metadata only (never the rows)."""
    suffix = path.suffix.lower()
    if suffix in (".sav", ".zsav", ".dta"):
        import pyreadstat

        reader = pyreadstat.read_dta if suffix == ".dta" else pyreadstat.read_sav
        _, meta = reader(str(path), metadataonly=True)
        return list(meta.column_names)
    if suffix == ".parquet":
        import pyarrow.parquet as pq

        return list(pq.read_schema(path).names)
    if suffix == ".csv":
        return [str(c) for c in pd.read_csv(path, nrows=0).columns]
    if suffix == ".xlsx":
        return [str(c) for c in pd.read_excel(path, nrows=0).columns]
    from skipwise.io import read_survey  # any other form the readers accept

    return [str(c) for c in read_survey(path).columns]


def check_weighting_columns(spec, data_cols: list[str], weighting_cols: list[str] | None, *, case_id: str,
                            data_file: Path, weighting_file: Path | None) -> None:
    """Raise one error listing every column the weighting plan needs that neither file can give.

    ``weighting_cols`` is None when the weighting runs on the data file itself.
    """
    problems: list[Problem] = []
    plan_file = str(spec.file) if spec.file else None
    own = weighting_cols is not None
    frame_cols = weighting_cols if own else data_cols
    where = weighting_file.name if own and weighting_file else data_file.name

    section = {"disposition column": "dispositions", "selection probability": "base", "base weight": "base",
               "eligibility class": "eligibility", "nonresponse class": "nonresponse",
               "propensity covariate": "nonresponse", "calibration variable": "calibration",
               "replicate PSU": "replicates", "replicate stratum": "replicates", "estimate variable": "estimates"}

    def line(col: str, role: str) -> int | None:
        lines = getattr(spec, "lines", None) or {}
        hits = [ln for key, ln in lines.items() if col in key]
        return min(hits) if hits else lines.get((section.get(role, ""),))

    if own:
        for cols, name in ((data_cols, data_file.name), (weighting_cols, where)):
            if case_id not in cols:
                problems.append(Problem(
                    code=ProblemCode.MISSING_COLUMN, category=Category.DATA, file=name, item=case_id,
                    message=f"case id column '{case_id}' is not in {name}: the answers cannot be joined to the "
                            "sample file",
                    hint=did_you_mean(case_id, cols) or "set case_id in the weighting plan to the id both files hold"))
    for col, role in weighting_columns(spec).items():
        if col in frame_cols:
            continue
        if role == "estimate variable" and own and col in data_cols:
            continue  # joined from the interviews by case id
        if own and col in data_cols:
            problems.append(Problem(
                code=ProblemCode.MISSING_COLUMN, category=Category.DATA, file=plan_file, line=line(col, role), item=col,
                message=f"{role} '{col}' is only in the interview file {data_file.name}, not in the weighting "
                        f"file {where}: it would be blank for every nonrespondent",
                hint=f"add '{col}' to the weighting file (every sampled case needs it)"))
            continue
        pool = list(dict.fromkeys([*frame_cols, *(data_cols if own else [])]))
        problems.append(Problem(
            code=ProblemCode.MISSING_COLUMN, category=Category.DATA, file=plan_file, line=line(col, role), item=col,
            message=f"{role} '{col}' is in neither the data file {data_file.name}"
                    + (f" nor the weighting file {where}" if own else ""),
            hint=did_you_mean(col, pool) or "name a column of the files, or remove it from the weighting plan"))
    if problems:
        raise SkipwiseError(problems, headline=f"{len(problems)} column(s) the weighting plan needs are missing")


def join_answers(frame: pd.DataFrame, data: pd.DataFrame, spec, case_id: str, *,
                 weighting_file: str | None = None) -> tuple[pd.DataFrame, list[str]]:
    """The weighting file with the estimate variables it lacks joined from the interviews by case id.

    Returns the joined frame (the weighting file's rows, order and index; nonrespondents
    blank in the joined columns) and the names of the joined columns.
    """
    wanted = [c for c in estimate_columns(spec) if c not in frame.columns and c in data.columns]
    if not wanted:
        return frame, []
    ids = data[case_id]
    if ids.duplicated().any():
        dup = ids[ids.duplicated()].iloc[0]
        raise SkipwiseError(Problem(code=ProblemCode.DUPLICATE_CASE_ID, category=Category.DATA, item=case_id,
                                    message=f"case id {dup!r} repeats in the interview file: answers cannot be "
                                            "joined to the sample file",
                                    hint="make the case ids unique"))
    answers = data[wanted].set_axis(ids.to_numpy())
    joined = answers.reindex(frame[case_id].to_numpy()).set_axis(frame.index)
    matched = frame[case_id].isin(ids).sum()
    if matched == 0:
        raise SkipwiseError(Problem(
            code=ProblemCode.BAD_DATA, category=Category.DATA, item=case_id, file=weighting_file,
            message="no case id of the interview file is in the weighting file: the answers cannot be joined",
            hint="both files must hold the same ids, stored the same way (numbers or text)"))
    return pd.concat([frame, joined], axis=1), wanted
