"""The weighting plan file (YAML): loading and validation with line numbers.

The keys are documented in ``docs/weighting.md``; the typed specs built here
live in :mod:`skipwise.weighting.specs`.  Every problem found is reported
together, each with the file and line: an unknown key with the nearest valid
key, a key given twice (which YAML would otherwise resolve silently by keeping
the second) as ``duplicate-name``.
"""

from __future__ import annotations

import math
import os
from pathlib import Path
from typing import Any

from skipwise.errors import ProblemCode, ProblemList, SkipwiseError, did_you_mean
from skipwise.questionnaire.yamlread import LineDict, LineList, is_version, load_yaml_text, read_text_file
from skipwise.weighting.adjust import DEFAULT_MAX_FACTOR, DEFAULT_MIN_RESPONDENTS
from skipwise.weighting.outcomes import OUTCOME_CATEGORIES
from skipwise.weighting.propensity import DEFAULT_PROPENSITY_CLASSES
from skipwise.weighting.specs import (
    CalibrationSpec, DispositionSpec, EstimateSpec, NonresponseSpec, ReplicateSpec, SplitSpec, TrimSpec,
    WeightingPlan, nearest_line,
)

__all__ = ["WeightingPlan", "DispositionSpec", "SplitSpec", "NonresponseSpec", "CalibrationSpec",
           "TrimSpec", "ReplicateSpec", "EstimateSpec", "load_plan", "parse_plan"]

PLAN_FORMAT = 1


# --- line map ------------------------------------------------------------------------------

def _line_map(doc: Any) -> tuple[dict[tuple, int], list[tuple[tuple, int]]]:
    """Key path -> line of every key and list entry, and (path, line) of every repeated key."""
    lines: dict[tuple, int] = {}
    duplicates: list[tuple[tuple, int]] = []

    def walk(node: Any, path: tuple) -> None:  # the plan's keys, never the data's cases
        if isinstance(node, LineDict):
            duplicates.extend((path + (key,), line) for key, line in node.duplicate_keys)
            for key, value in node.items():
                lines[path + (key,)] = node.key_line(key)
                walk(value, path + (key,))
        elif isinstance(node, LineList):
            for i, value in enumerate(node):
                lines[path + (i,)] = node.item_line(i)
                walk(value, path + (i,))

    walk(doc, ())
    return lines, sorted(duplicates, key=lambda d: d[1])


class _Checker:
    def __init__(self, file: str | None, lines: dict[tuple, int]):
        self.problems = ProblemList(file=file)
        self.lines = lines

    def line(self, path: tuple) -> int | None:
        return nearest_line(self.lines, path)

    def add(self, code: ProblemCode, path: tuple, message: str, hint: str | None = None) -> None:
        self.problems.add(code, message, line=self.line(path), item=".".join(map(str, path)) or None, hint=hint)

    def mapping(self, value: Any, path: tuple, allowed: tuple[str, ...], required: tuple[str, ...] = ()) -> dict:
        if value is None:
            value = {}
        if not isinstance(value, dict):
            what = f"'{'.'.join(map(str, path))}'" if path else "the plan"
            self.add(ProblemCode.BAD_VALUE, path, f"{what} must be a mapping of keys",
                     None if path else "start with 'format: 1' and the plan's keys (see docs/weighting.md)")
            return {}
        for key in value:
            if key not in allowed:
                self.add(ProblemCode.UNKNOWN_KEY, path + (key,), f"unknown key '{key}'",
                         did_you_mean(str(key), allowed) or f"valid keys: {', '.join(allowed)}")
        for key in required:
            if key not in value:
                self.add(ProblemCode.MISSING_KEY, path, f"key '{key}' is required")
        return value

    def number(self, m: dict, key: str, path: tuple, default: float | None, *, low: float | None = None,
               high: float | None = None, integer: bool = False) -> float | None:
        if key not in m:
            return default
        v = m[key]
        ok = isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v)
        if ok and integer and not float(v).is_integer():
            ok = False
        if ok and ((low is not None and v < low) or (high is not None and v > high)):
            ok = False
        if not ok:
            rng = f" between {low:g} and {high:g}" if low is not None and high is not None else (
                f" of at least {low:g}" if low is not None else "")
            self.add(ProblemCode.BAD_VALUE, path + (key,),
                     f"'{key}' must be {'a whole number' if integer else 'a number'}{rng}, got {v!r}")
            return default
        return int(v) if integer else float(v)

    def name(self, m: dict, key: str, path: tuple) -> str | None:
        v = m.get(key)
        if v is None:
            return None
        if isinstance(m, LineDict) and not isinstance(v, (str, list, dict)):
            v = m.text(key)  # a name is the text written (YAML 1.2 rule): `column: 2024` is "2024"
        if not isinstance(v, str) or not v:
            self.add(ProblemCode.BAD_VALUE, path + (key,), f"'{key}' must be a column name, got {v!r}")
            return None
        return v

    def names(self, m: dict, key: str, path: tuple) -> tuple[str, ...]:
        v = m.get(key, [])
        if isinstance(m, LineDict) and key in m and not isinstance(v, (str, list, dict)):
            v = m.text(key)
        if isinstance(v, str):
            v = [v]
        if isinstance(v, LineList):
            v = [v.text(i) if not isinstance(x, (list, dict)) else x for i, x in enumerate(v)]
        if not isinstance(v, list) or not all(isinstance(x, str) for x in v):
            self.add(ProblemCode.BAD_VALUE, path + (key,), f"'{key}' must be a list of column names")
            return ()
        return tuple(v)

    def choice(self, m: dict, key: str, path: tuple, choices: tuple[str, ...], default: str) -> str:
        v = m.get(key, default)
        if v not in choices:
            self.add(ProblemCode.BAD_VALUE, path + (key,), f"'{key}' must be one of {', '.join(choices)}, got {v!r}",
                     did_you_mean(str(v), choices))
            return default
        return v


TOP_KEYS = ("format", "case_id", "dispositions", "e", "base", "eligibility", "nonresponse",
            "calibration", "trimming", "replicates", "estimates", "output")


def _dispositions(c: _Checker, raw: Any) -> DispositionSpec:
    from skipwise.weighting.margins import category_label

    p = ("dispositions",)
    m = c.mapping(raw, p, ("column", "categories", "interview_split", "partials_count_as_respondents"),
                  required=("column", "categories"))
    cats = c.mapping(m.get("categories"), p + ("categories",), OUTCOME_CATEGORIES)
    codes: dict[str, str] = {}
    for cat, values in cats.items():
        vals = values if isinstance(values, list) else [values]
        for i, v in enumerate(vals):
            if v is None or isinstance(v, (dict, list)):
                c.add(ProblemCode.BAD_VALUE, p + ("categories", cat), f"disposition code {v!r} must be a value")
                continue
            lab = category_label(v)
            if lab in codes and codes[lab] != cat:
                c.add(ProblemCode.CODE_COLLISION, p + ("categories", cat, i),
                      f"disposition code {v!r} is mapped to both {codes[lab]} and {cat}")
            codes[lab] = cat
    if "I" not in cats and "categories" in m:
        c.add(ProblemCode.MISSING_KEY, p + ("categories",), "no disposition is mapped to complete interviews (I)")
    split = None
    if m.get("interview_split") is not None:
        sp = p + ("interview_split",)
        s = c.mapping(m["interview_split"], sp, ("applies_to", "breakoff_below", "complete_above", "breakoff_to"))
        applies = c.names(s, "applies_to", sp) or ("I", "P")
        for a in applies:
            if a not in OUTCOME_CATEGORIES:
                c.add(ProblemCode.BAD_VALUE, sp + ("applies_to",), f"'{a}' is not an outcome category",
                      did_you_mean(a, OUTCOME_CATEGORIES))
        lo = c.number(s, "breakoff_below", sp, 0.5, low=0, high=1)
        hi = c.number(s, "complete_above", sp, 0.8, low=0, high=1)
        if lo is not None and hi is not None and lo > hi:
            c.add(ProblemCode.BAD_VALUE, sp, f"breakoff_below ({lo}) must not exceed complete_above ({hi})")
        split = SplitSpec(applies_to=applies, breakoff_below=lo, complete_above=hi,
                          breakoff_to=c.choice(s, "breakoff_to", sp, ("R", "P", "O"), "R"))
    partials = m.get("partials_count_as_respondents", True)
    if not isinstance(partials, bool):
        c.add(ProblemCode.BAD_VALUE, p + ("partials_count_as_respondents",), "must be true or false")
        partials = True
    return DispositionSpec(column=c.name(m, "column", p) or "", codes=codes, split=split, partials_respond=partials)


def _margins(c: _Checker, raw: Any, path: tuple) -> dict:
    if raw is None:
        return {}
    if not isinstance(raw, dict):
        c.add(ProblemCode.BAD_VALUE, path, "margins must map each variable to {category: total}")
        return {}
    out = {}
    for var, cats in raw.items():
        if not isinstance(cats, dict) or not cats:
            c.add(ProblemCode.BAD_VALUE, path + (var,), f"margin '{var}' must map categories to population totals")
            continue
        for cat, tot in cats.items():
            if isinstance(cat, bool):
                c.add(ProblemCode.BAD_VALUE, path + (var, cat), f"category key read as {cat}",
                      "YAML reads yes/no/on/off as true/false: quote the key, e.g. \"yes\": 120")
            if isinstance(tot, bool) or not isinstance(tot, (int, float)) or tot < 0:
                c.add(ProblemCode.BAD_VALUE, path + (var, cat), f"target of {var}={cat} must be a non-negative number")
        out[str(var)] = dict(cats)
    totals = {v: sum(float(t) for t in cs.values() if isinstance(t, (int, float)) and not isinstance(t, bool))
              for v, cs in out.items()}
    if len(totals) > 1 and max(totals.values()) - min(totals.values()) > 1e-6 * max(max(totals.values()), 1.0):
        listing = ", ".join(f"{v}={t:,.6g}" for v, t in totals.items())
        c.add(ProblemCode.BAD_VALUE, path, f"margins add to different totals ({listing})",
              "every margin must describe the same population total")
    return out


def parse_plan(raw: Any, *, file: str | None = None, lines: dict[tuple, int] | None = None) -> WeightingPlan:
    """Validate a plan already read from YAML (``raw``) and build a :class:`WeightingPlan`.

    ``raw`` read by :func:`skipwise.questionnaire.yamlread.load_yaml_text` knows
    the line of every key, used when ``lines`` is not given, and its repeated
    keys, reported as ``duplicate-name``.
    """
    found, duplicates = _line_map(raw)
    lines = found if lines is None else lines
    c = _Checker(file, lines)
    for path, line in duplicates:
        c.problems.add(ProblemCode.DUPLICATE_NAME, f"key '{path[-1]}' is given twice", line=line,
                       item=".".join(map(str, path)), hint="keep one of them (the second would silently win)")
    top = c.mapping(raw, (), TOP_KEYS, required=("format", "dispositions"))
    if "format" in top and not is_version(top["format"], PLAN_FORMAT):
        c.add(ProblemCode.FORMAT_VERSION, ("format",), f"plan format {top['format']!r} is not supported",
              f"write format: {PLAN_FORMAT}")
    disp = _dispositions(c, top.get("dispositions")) if "dispositions" in top else DispositionSpec(column="", codes={})
    e = None
    if top.get("e", "estimate") != "estimate":
        e = c.number(top, "e", (), None, low=0, high=1)
    base = c.mapping(top.get("base"), ("base",), ("probability", "weight"))
    if "probability" in base and "weight" in base:
        c.add(ProblemCode.BAD_VALUE, ("base",), "give either 'probability' or 'weight', not both")
    elig = None
    if "eligibility" in top:
        em = c.mapping(top["eligibility"], ("eligibility",), ("classes",))
        elig = c.names(em, "classes", ("eligibility",))
    nr = None
    if "nonresponse" in top:
        p = ("nonresponse",)
        m = c.mapping(top["nonresponse"], p, ("method", "classes", "min_respondents", "max_factor", "covariates",
                                               "categorical", "propensity_use", "propensity_classes"))
        method = c.choice(m, "method", p, ("classes", "propensity"), "classes")
        nr = NonresponseSpec(
            method=method, classes=c.names(m, "classes", p),
            min_respondents=c.number(m, "min_respondents", p, DEFAULT_MIN_RESPONDENTS, low=1, integer=True),
            max_factor=c.number(m, "max_factor", p, DEFAULT_MAX_FACTOR, low=1),
            covariates=c.names(m, "covariates", p), categorical=c.names(m, "categorical", p),
            propensity_use=c.choice(m, "propensity_use", p, ("inverse", "classes"), "inverse"),
            propensity_classes=c.number(m, "propensity_classes", p, DEFAULT_PROPENSITY_CLASSES, low=1, integer=True))
        if method == "propensity" and not nr.covariates:
            c.add(ProblemCode.MISSING_KEY, p, "the propensity method needs 'covariates'")
    cal = None
    if "calibration" in top:
        p = ("calibration",)
        m = c.mapping(top["calibration"], p, ("method", "margins", "totals", "bounds", "tolerance", "max_iterations"))
        method = c.choice(m, "method", p, ("poststratify", "rake", "linear", "logit"), "rake")
        margins = _margins(c, m.get("margins"), p + ("margins",))
        totals = m.get("totals") or {}
        if not isinstance(totals, dict) or not all(isinstance(v, (int, float)) and not isinstance(v, bool)
                                                   for v in totals.values()):
            c.add(ProblemCode.BAD_VALUE, p + ("totals",), "totals must map numeric variables to population totals")
            totals = {}
        if totals and method not in ("linear", "logit"):
            c.add(ProblemCode.BAD_VALUE, p + ("totals",), f"numeric totals need method linear or logit, not {method}")
        if not margins and not totals:
            c.add(ProblemCode.MISSING_KEY, p, "calibration needs 'margins' (or 'totals')")
        if method == "poststratify" and len(margins) != 1:
            c.add(ProblemCode.BAD_VALUE, p + ("margins",),
                  "post-stratification takes exactly one margin (cross the variables into one column first)")
        bounds = m.get("bounds", [0.5, 2.0])
        if not (isinstance(bounds, list) and len(bounds) == 2 and all(isinstance(b, (int, float)) for b in bounds)
                and 0 <= bounds[0] < 1 < bounds[1]):
            c.add(ProblemCode.BAD_VALUE, p + ("bounds",), f"bounds must be [L, U] with 0 <= L < 1 < U, got {bounds!r}")
            bounds = [0.5, 2.0]
        cal = CalibrationSpec(method=method, margins=margins, totals=totals, bounds=(float(bounds[0]), float(bounds[1])),
                              tolerance=c.number(m, "tolerance", p, 1e-10, low=0),
                              max_iterations=c.number(m, "max_iterations", p, 1000, low=1, integer=True))
    trim = None
    if "trimming" in top:
        p = ("trimming",)
        m = c.mapping(top["trimming"], p, ("median_multiple", "percentile", "tolerance", "max_iterations"))
        if ("median_multiple" in m) == ("percentile" in m):
            c.add(ProblemCode.BAD_VALUE, p, "give exactly one of 'median_multiple' and 'percentile'")
        trim = TrimSpec(median_multiple=c.number(m, "median_multiple", p, None, low=1),
                        percentile=c.number(m, "percentile", p, None, low=0, high=100),
                        tolerance=c.number(m, "tolerance", p, 1e-6, low=0),
                        max_iterations=c.number(m, "max_iterations", p, 50, low=1, integer=True))
    rep = None
    if "replicates" in top:
        p = ("replicates",)
        m = c.mapping(top["replicates"], p, ("method", "psu", "strata", "count", "seed", "fpc", "fraction"))
        fpc = m.get("fpc", False)
        if not isinstance(fpc, bool):
            c.add(ProblemCode.BAD_VALUE, p + ("fpc",), f"'fpc' must be true or false, got {fpc!r}")
            fpc = False
        rep = ReplicateSpec(method=c.choice(m, "method", p, ("jackknife", "bootstrap"), "jackknife"),
                            psu=c.name(m, "psu", p), strata=c.name(m, "strata", p),
                            count=c.number(m, "count", p, 200, low=2, integer=True),
                            seed=c.number(m, "seed", p, 12345, low=0, integer=True),
                            fpc=fpc, fraction=c.name(m, "fraction", p))
        if fpc and rep.fraction is None and (rep.psu is not None or base.get("probability") is None):
            c.add(ProblemCode.MISSING_KEY, p + ("fpc",),
                  "'fpc: true' needs the sampling fractions: name their column with 'fraction' (each "
                  "stratum's share of its PSUs sampled); without a PSU column the base 'probability' "
                  "serves")
        if rep.fraction is not None and not fpc:
            c.add(ProblemCode.BAD_VALUE, p + ("fraction",), "'fraction' is used only with 'fpc: true'")
    est = None
    if "estimates" in top:
        p = ("estimates",)
        m = c.mapping(top["estimates"], p, ("means", "proportions", "exclude_values"))
        excl = m.get("exclude_values", [])
        est = EstimateSpec(means=c.names(m, "means", p), proportions=c.names(m, "proportions", p),
                           exclude_values=tuple(excl if isinstance(excl, list) else [excl]))
    out = c.mapping(top.get("output"), ("output",), ("workbook", "prefix"))
    workbook = _workbook_path(c, out.get("workbook"), file)
    c.problems.raise_if_any(headline=f"{len(c.problems)} problem(s) in weighting plan {file or ''}".strip())
    return WeightingPlan(
        file=file, dispositions=disp, case_id=c.name(top, "case_id", ()), e=e,
        base_probability=base.get("probability"), base_weight=base.get("weight"), eligibility_classes=elig,
        nonresponse=nr, calibration=cal, trimming=trim, replicates=rep, estimates=est,
        workbook=workbook, prefix=str(out.get("prefix", "wt_")), lines=dict(lines or {}))


def _workbook_path(c, value: Any, file: str | None) -> str | None:
    """``output.workbook`` resolved against the plan's folder; a path leaving it is refused."""
    if value is None:
        return None
    p = ("output", "workbook")
    if not isinstance(value, str) or not value.strip():
        c.add(ProblemCode.BAD_VALUE, p, f"'output.workbook' must be a file name, got {value!r}")
        return None
    base = Path(file).resolve().parent if file else Path.cwd()
    target = Path(value)
    resolved = Path(os.path.normpath(base / target))
    if target.is_absolute() or (resolved != base and base not in resolved.parents):
        c.add(ProblemCode.BAD_VALUE, p, f"'output.workbook' {value!r} leads out of the plan's folder {base}",
              "name a file in the plan's folder or below it, or give the path with --workbook")
        return None
    return str(resolved)


def load_plan(path: str | Path | None = None, *, text: str | None = None) -> WeightingPlan:
    """Read and validate a weighting plan from ``path`` or from ``text``.

    Raises
    ------
    SkipwiseError
        ``file-not-found``, ``file-unreadable`` (a folder, or text that is not
        UTF-8), ``yaml-syntax``, or every plan problem at once (unknown keys with
        the nearest valid key, repeated keys, missing keys, bad values), each
        with its line.
    """
    file = None if path is None else str(path)
    if text is None:
        if path is None:
            raise SkipwiseError("give a plan path or text")
        text = read_text_file(path)
    return parse_plan(load_yaml_text(text, file), file=file)
