"""The imputation plan file (YAML): what to impute, how, and how to write it.

Keys are documented in docs/imputation.md. Every problem is reported with its
line, unknown keys and names with the nearest valid one, all in one error.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Iterable

from skipwise.classify import statuses as S
from skipwise.errors import Category, Problem, ProblemCode, ProblemList, SkipwiseError, did_you_mean
from skipwise.impute.fit import method_misfit
from skipwise.impute.skipaware import NEVER_IMPUTED, SKIP_METHODS, ItemRule, SkipAwareSpec
from skipwise.questionnaire.model import Questionnaire
from skipwise.questionnaire.yamlread import LineDict, LineList, is_version, load_yaml_text, read_text_file

__all__ = ["ImputePlan", "OutputSpec", "load_plan", "check_plan", "TOP_KEYS", "RULE_KEYS", "OUTPUT_KEYS"]

TOP_KEYS = ("format", "imputations", "seed", "statuses", "skip_fill", "max_redraws", "default", "items",
            "only", "exclude", "output")
RULE_KEYS = ("method", "classes", "covariates", "donors", "max_donor_use", "weights")
OUTPUT_KEYS = ("form", "imputation_column", "flag_suffix")
FORMS = ("files", "stacked")
SKIP_FILLS = ("auto", "blank", "code")
#: Most imputations a plan may ask for (each is a full copy of the data in memory).
MAX_IMPUTATIONS = 1000


@dataclass(frozen=True, kw_only=True)
class OutputSpec:
    """How completed data are written: M files (``<stem>_<k><ext>``) or one stacked file."""

    form: str = "files"
    imputation_column: str = "imputation"
    flag_suffix: str = "_imp"


@dataclass(frozen=True, kw_only=True)
class ImputePlan:
    """A parsed plan: the method spec, the output form and where each key stood."""

    spec: SkipAwareSpec
    output: OutputSpec = field(default_factory=OutputSpec)
    file: str | None = None
    lines: dict[tuple, int] = field(default_factory=dict)

    def line(self, *path: Any) -> int | None:
        while path:
            if path in self.lines:
                return self.lines[path]
            path = path[:-1]
        return None


class _Reader:
    def __init__(self, file: str | None):
        self.problems = ProblemList(file=file)
        self.lines: dict[tuple, int] = {}

    def add(self, code: ProblemCode, line: int | None, message: str, hint: str | None = None,
            item: str | None = None) -> None:
        self.problems.add(code, message, line=line, hint=hint, item=item)

    def mapping(self, value: Any, path: tuple, allowed: tuple[str, ...], line: int | None) -> LineDict | None:
        if value is None:
            return None
        if not isinstance(value, dict):
            self.add(ProblemCode.BAD_VALUE, line, f"'{'.'.join(map(str, path)) or 'plan'}' must be a mapping")
            return None
        for key in value:
            kl = value.key_line(key) if isinstance(value, LineDict) else line
            self.lines[(*path, key)] = kl
            if key not in allowed and path[-1:] != ("items",):
                self.add(ProblemCode.UNKNOWN_KEY, kl, f"unknown key '{key}'",
                         did_you_mean(str(key), allowed) or f"valid keys: {', '.join(allowed)}")
        where = f" under '{'.'.join(map(str, path))}'" if path else ""
        for key, dup_line in getattr(value, "duplicate_keys", []):
            # YAML keeps the last of two equal keys; the reader must not silently drop the first.
            self.add(ProblemCode.DUPLICATE_NAME, dup_line, f"key '{key}' is given twice{where}",
                     "keep one of them", item=str(key) if path == ("items",) else None)
        return value

    def line_of(self, m: dict, key: str) -> int | None:
        return m.key_line(key) if isinstance(m, LineDict) else None

    def integer(self, m: dict, key: str, default: int | None, low: int, high: int | None = None) -> int | None:
        if key not in m or m[key] is None:
            return default
        v = m[key]
        if isinstance(v, bool) or not isinstance(v, int) or v < low or (high is not None and v > high):
            bound = f"from {low} to {high:,}" if high is not None else f">= {low}"
            self.add(ProblemCode.BAD_VALUE, self.line_of(m, key), f"'{key}' must be a whole number {bound}, got {v!r}",
                     "common practice: 5 to 100 imputations" if key == "imputations" else None)
            return default
        return v

    def text(self, m: dict, key: str, default: str) -> str:
        """A name as the text written (YAML 1.2 rule); a list, mapping or empty text is refused."""
        if key not in m:
            return default
        t = m.text(key) if isinstance(m, LineDict) else (m[key] if isinstance(m[key], str) else None)
        if not t or not t.strip():
            self.add(ProblemCode.BAD_VALUE, self.line_of(m, key), f"'{key}' must be a name, got {m[key]!r}")
            return default
        return t

    def names(self, m: dict, key: str) -> tuple[str, ...]:
        v = m.get(key)
        if v is None:
            return ()
        if isinstance(m, LineDict) and not isinstance(v, (str, list, dict)):
            v = m.text(key)  # a name is the text written (YAML 1.2 rule)
        if isinstance(v, str):
            v = [v]
        if isinstance(v, LineList):
            v = [v.text(i) if not isinstance(x, (list, dict)) else x for i, x in enumerate(v)]
        if not isinstance(v, list) or not all(isinstance(x, str) for x in v):
            self.add(ProblemCode.BAD_VALUE, self.line_of(m, key), f"'{key}' must be a list of names")
            return ()
        return tuple(v)

    def choice(self, m: dict, key: str, choices: Iterable[str], default: str) -> str:
        v = m.get(key, default)
        choices = tuple(choices)
        if v not in choices:
            self.add(ProblemCode.BAD_VALUE, self.line_of(m, key), f"'{key}' must be one of {', '.join(choices)}, got {v!r}",
                     did_you_mean(str(v), choices))
            return default
        return v

    def rule(self, raw: Any, path: tuple, line: int | None, base: ItemRule) -> ItemRule:
        if isinstance(raw, str):  # shorthand: `item: pmm`
            raw = {"method": raw}
        m = self.mapping(raw, path, RULE_KEYS, line)
        if m is None:
            return base
        w = m.get("weights", base.weights)
        if w is not None and not isinstance(w, str):
            self.add(ProblemCode.BAD_VALUE, self.line_of(m, "weights"), "'weights' must be a column name")
            w = None
        return ItemRule(
            method=self.choice(m, "method", (*SKIP_METHODS, "none"), base.method),
            classes=self.names(m, "classes") if "classes" in m else base.classes,
            covariates=self.names(m, "covariates") if "covariates" in m else base.covariates,
            donors=self.integer(m, "donors", base.donors, 1),
            max_donor_use=self.integer(m, "max_donor_use", base.max_donor_use, 1),
            weights=w,
        )


def parse_plan(doc: Any, file: str | None = None) -> ImputePlan:
    """Check a plan's structure and build it (names are checked by :func:`check_plan`)."""
    r = _Reader(file)
    top = r.mapping(doc if doc is not None else LineDict(), (), TOP_KEYS, 1) or LineDict()
    if "format" in top and not is_version(top["format"], 1):
        r.add(ProblemCode.FORMAT_VERSION, r.line_of(top, "format"), f"plan format {top['format']!r} is not supported",
              "use format: 1")
    seed = top.get("seed")
    if seed is not None and (isinstance(seed, bool) or not isinstance(seed, int) or seed < 0):
        r.add(ProblemCode.BAD_VALUE, r.line_of(top, "seed"), f"'seed' must be a whole number >= 0, got {seed!r}")
        seed = None
    default = r.rule(top.get("default"), ("default",), r.line_of(top, "default"), ItemRule())
    items_raw = r.mapping(top.get("items"), ("items",), (), r.line_of(top, "items")) or {}
    rules, excluded = {}, list(r.names(top, "exclude"))
    for name, raw in items_raw.items():
        line = items_raw.key_line(name) if isinstance(items_raw, LineDict) else None
        rule = r.rule(raw, ("items", name), line, default)
        if rule.method == "none":
            excluded.append(str(name))
        else:
            rules[str(name)] = rule
    statuses = r.names(top, "statuses") or None
    out = r.mapping(top.get("output"), ("output",), OUTPUT_KEYS, r.line_of(top, "output")) or {}
    output = OutputSpec(form=r.choice(out, "form", FORMS, "files"),
                        imputation_column=r.text(out, "imputation_column", "imputation"),
                        flag_suffix=r.text(out, "flag_suffix", "_imp"))
    spec = SkipAwareSpec(
        default=default if default.method != "none" else ItemRule(), items=rules,
        include=r.names(top, "only") or None, exclude=tuple(excluded), statuses=statuses,
        m=r.integer(top, "imputations", 5, 1, MAX_IMPUTATIONS), seed=seed,
        skip_fill=r.choice(top, "skip_fill", SKIP_FILLS, "auto"),
        max_redraws=r.integer(top, "max_redraws", 20, 0),
    )
    r.problems.raise_if_any(headline=f"{len(r.problems)} problem(s) in imputation plan {file or ''}".strip())
    return ImputePlan(spec=spec, output=output, file=file, lines=r.lines)


def load_plan(path: str | Path | None = None, *, text: str | None = None) -> ImputePlan:
    """Read a plan file (or ``text``) and check its structure."""
    if (path is None) == (text is None):
        raise SkipwiseError(Problem(
            code=ProblemCode.BAD_VALUE, category=Category.USAGE, file=str(path) if path is not None else None,
            message="an imputation plan needs exactly one source: "
                    + ("both a file and a text were given" if path is not None else "none was given"),
            hint="pass the plan file's path, or its text as text=..., not both"))
    file = str(path) if path is not None else None
    doc = load_yaml_text(read_text_file(path) if path is not None else text, file)
    return parse_plan(doc, file)


def check_plan(plan: ImputePlan, q: Questionnaire, columns: Iterable[str]) -> None:
    """Check every name of the plan against the questionnaire and the data; raise all problems."""
    pl = ProblemList(file=plan.file)
    columns = [str(c) for c in columns]
    items = list(q.item_names)
    valid_status = [s for s in (*q.nonresponse_reasons, S.ITEM_MISSING, S.BREAKOFF)]
    spec = plan.spec

    def unknown(name: str, pool: list[str], what: str, *path: Any) -> None:
        pl.add(ProblemCode.UNKNOWN_NAME, f"{what} '{name}' is not known", line=plan.line(*path), item=name,
               hint=did_you_mean(name, pool) or None)

    for key in ("only", "exclude"):
        for name in (spec.include or ()) if key == "only" else spec.exclude:
            if name not in q:
                unknown(name, items, "item", key)
    for s in spec.statuses or ():
        if s in NEVER_IMPUTED:
            pl.add(ProblemCode.BAD_VALUE, f"status '{s}' is never imputed", line=plan.line("statuses"),
                   hint=f"choose among {', '.join(valid_status)}")
        elif s not in valid_status:
            unknown(s, valid_status, "status", "statuses")
    rules = [("default", None, spec.default)] + [("items", n, r) for n, r in spec.items.items()]
    for where, name, rule in rules:
        path = (where,) if name is None else (where, name)
        if name is not None and name not in q:
            unknown(name, items, "item", *path)
            continue
        for var in (*rule.classes, *rule.covariates, *((rule.weights,) if rule.weights else ())):
            if var not in q and var not in columns:
                unknown(var, items + columns, "class, covariate or weight column", *path)
        targets = [name] if name is not None else [t for t in spec.targets(q) if t not in spec.items]
        for t in targets:
            bad = method_misfit(q.item(t), rule.method)
            if bad:
                pl.add(ProblemCode.TYPE_CLASH, bad, line=plan.line(*path), item=t,
                       hint="give the item its own method under items:" if name is None
                       else "choose one of the methods that fit")
    _check_outputs(plan, q, columns, pl)
    pl.raise_if_any(headline=f"{len(pl)} problem(s) in imputation plan {plan.file or ''}".strip())


def _check_outputs(plan: ImputePlan, q: Questionnaire, columns: list[str], pl: ProblemList) -> None:
    """At least one item to impute, and flag / imputation-number names that clash with nothing."""
    from skipwise.generated import Generated, generated_problems

    targets = plan.spec.targets(q)
    if not targets:
        where = next((k for k in ("only", "exclude", "items", "default") if plan.line(k) is not None), None)
        pl.add(ProblemCode.BAD_VALUE, "the plan leaves no item to impute", line=plan.line(where) if where else None,
               hint="check 'only', 'exclude' and the items set to method: none (text, date and multi items "
                    "are imputed only when named under items:)")
        return
    out = plan.output
    names = []
    if out.form == "stacked":
        names.append(Generated(name=out.imputation_column, role="imputation column", file=plan.file,
                               line=plan.line("output", "imputation_column"),
                               hint="set output.imputation_column in the plan to a name the data does not use"))
    names += [Generated(name=f"{t}{out.flag_suffix}", role=f"imputation flag of '{t}'", file=plan.file,
                        line=plan.line("output", "flag_suffix"),
                        hint="set output.flag_suffix in the plan to another suffix") for t in targets]
    pl.extend(generated_problems(names, columns))
