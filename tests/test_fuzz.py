"""Fuzzing: whatever a user feeds in, skipwise answers or raises SkipwiseError — nothing else.

1. Questionnaire texts built from random item lists (types, ranges, values, codes, rules),
   well-formed and mutated (lines deleted or duplicated, random tokens inserted), fed to
   ``loads_questionnaire``.
2. Random data frames (numbers, codes, blanks, text, mixed object columns, booleans, dates,
   columns missing or extra) fed to ``classify`` and to ``write_item_report``.
3. Random rules over earlier items, built into a questionnaire and evaluated by ``classify``.

Only the error contract is asserted (docs/contract.md §4: a user error is one SkipwiseError),
plus the shape of a successful classification (docs/contract.md §1: one status per case and
item, from the status vocabulary).
"""

from __future__ import annotations

import tempfile
from pathlib import Path

import numpy as np
import pandas as pd
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from hypothesis_scale import examples

from skipwise.classify import classify
from skipwise.errors import SkipwiseError
from skipwise.questionnaire import loads_questionnaire
from skipwise.report import write_item_report

FIXED_STATUSES = {"answered", "skipped", "item_missing", "wrong_code", "off_route", "gate_unknown",
                  "breakoff", "invalid"}
NAMES = ["age", "work", "hours", "sat", "modes", "visit", "note", "kids"]
CONTEXT = ["region", "wt"]
TYPES = ["integer", "number", "categorical", "text", "date", "multi"]
REASONS = ["dont_know", "refused", "not_asked", "varies"]
KINDS = ["structural", "nonresponse", "substantive"]
TOKENS = ["{", "}", "[", "]", ":", ",", "-", "'", '"', "#", "&a", "*a", "!!python/object", "\t", "==",
          "asked_if:", "type: multi", "range: [", "null", "~", "99999999999999999999", "-1e309", "nan",
          ".a", "2026-02-30", "yes", "codes:", "values: {}", "roster: {count: age, max: 3}", "é", "\x00"]

SETTINGS = dict(deadline=None, suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])


# -- questionnaire texts ----------------------------------------------------------------------
numbers = st.one_of(st.integers(-20, 120), st.floats(-20, 120, allow_nan=False).map(lambda x: round(x, 1)))


@st.composite
def codes(draw, tidy=False):
    out = []
    values = [-1, -7, -8, -9] if tidy else [-1, -7, -8, -9, 997, 1, ".a", "x"]
    for value in draw(st.lists(st.sampled_from(values), max_size=3, unique=tidy)):
        out.append("{value: %s, reason: %s, kind: %s}" % (
            value, draw(st.sampled_from(REASONS)), draw(st.sampled_from(KINDS + ([] if tidy else ["struct"])))))
    return "[" + ", ".join(out) + "]"


@st.composite
def rules(draw, earlier, tidy=False):
    """A rule over earlier names (untidy: also an unknown one, text comparisons)."""
    names = earlier + CONTEXT + ([] if tidy else ["ghost"])

    def atom():
        name = draw(st.sampled_from(names))
        form = draw(st.integers(0, 6))
        if form == 0:
            return f"answered({name})"
        if form == 1 and not (tidy and name in CONTEXT):
            return f'has_code({name}, "{draw(st.sampled_from(REASONS + ["nope"]))}")'
        if form == 2:
            return f"{name} in [{draw(numbers)}, {draw(numbers)}]"
        if form == 3:
            return f"{name} not in [1, 2]"
        if form == 4:
            return f"{name} {draw(st.sampled_from(['+', '-', '*', '/']))} 2 > {draw(numbers)}"
        if form == 5 and not tidy:
            return f"{name} == 'x'"
        return f"{name} {draw(st.sampled_from(['==', '!=', '<', '<=', '>', '>=']))} {draw(numbers)}"

    text = atom()
    for _ in range(draw(st.integers(0, 2))):
        joiner = draw(st.sampled_from(["and", "or", "and not"]))
        text = f"({text}) {joiner} {atom()}" if draw(st.booleans()) else f"{text} {joiner} {atom()}"
    return text


@st.composite
def item_lines(draw, name, earlier, tidy=False):
    """One item in flow style; ``tidy`` items mostly load (sorted ranges, values, options)."""
    kind = draw(st.sampled_from(TYPES + ([] if tidy else ["integr"])))
    parts = [f"name: {name}", f"type: {kind}"]
    if kind in ("integer", "number") and draw(st.booleans()):
        lo, hi = draw(numbers), draw(numbers)
        lo, hi = (min(lo, hi), max(lo, hi)) if tidy else (lo, hi)
        parts.append(f"range: [{lo}, {hi}]")
    if kind == "date" and draw(st.booleans()):
        parts.append(f"range: [{draw(st.sampled_from(['2026-01-01', '2025-06-30', 'soon']))}, 2026-12-31]")
    if kind == "categorical" or (not tidy and draw(st.integers(0, 9)) == 0):
        vals = draw(st.lists(st.integers(0, 6), min_size=int(tidy), max_size=4, unique=tidy))
        parts.append("values: {" + ", ".join(f'{v}: "L{v}"' for v in vals) + "}")
    if kind == "multi" and (tidy or draw(st.integers(0, 4))):
        opts = draw(st.lists(st.sampled_from(["car", "bus", "rail", "foot"]), min_size=1, max_size=3, unique=tidy))
        parts.append("options: {" + ", ".join(f"{o}: {o.title()}" for o in opts) + "}")
    if draw(st.booleans()):
        parts.append(f"codes: {draw(codes(tidy))}")
    if earlier and draw(st.booleans()):
        parts.append("asked_if: " + repr(draw(rules(earlier, tidy))).replace("\\'", "''"))
    return "      - {" + ", ".join(parts) + "}"


@st.composite
def questionnaire_texts(draw, mutate=True):
    # duplicate names in mutated texts only
    names = draw(st.lists(st.sampled_from(NAMES), min_size=1, max_size=6, unique=not mutate))
    lines = ["format: 1", "survey: {name: fuzz, case_id: id}", f"context: [{', '.join(CONTEXT)}]",
             "codes: [{value: -9, reason: refused, kind: nonresponse}, {value: -1, reason: not_asked, kind: structural}]",
             "sections:", "  - name: s1"]
    if draw(st.integers(0, 4)) == 0:
        lines.append(f"    asked_if: {draw(rules([]))!r}")
    lines.append("    items:")
    for i, name in enumerate(names):
        if i and draw(st.integers(0, 5)) == 0:
            lines += [f"  - name: s{i + 2}", "    items:"]
        lines.append(draw(item_lines(name, names[:i], tidy=not mutate)))
    if mutate:
        for _ in range(draw(st.integers(0, 3))):
            what = draw(st.sampled_from(["delete", "duplicate", "token", "indent"]))
            at = draw(st.integers(0, len(lines) - 1))
            if what == "delete" and len(lines) > 1:
                del lines[at]
            elif what == "duplicate":
                lines.insert(at, lines[at])
            elif what == "token":
                pos = draw(st.integers(0, len(lines[at])))
                lines[at] = lines[at][:pos] + draw(st.sampled_from(TOKENS)) + lines[at][pos:]
            else:
                lines[at] = "  " + lines[at]
    return "\n".join(lines) + "\n"


@settings(max_examples=examples(150), **SETTINGS)
@given(questionnaire_texts())
def test_questionnaire_text_loads_or_raises_skipwise_error(text):
    try:
        q = loads_questionnaire(text, file="fuzz.yaml")
    except SkipwiseError as err:
        assert err.problems and all(p.message for p in err.problems)
        assert err.render().strip()
    else:
        assert len({it.name for it in q.items}) == len(q.items)


@settings(max_examples=examples(100), **SETTINGS)
@given(st.text(max_size=200))
def test_arbitrary_text_loads_or_raises_skipwise_error(text):
    try:
        loads_questionnaire(text, file="junk.yaml")
    except SkipwiseError as err:
        assert err.problems


# -- random data frames -----------------------------------------------------------------------
def cell_values():
    return st.one_of(
        st.none(), st.just(np.nan), st.integers(-10, 200), st.floats(allow_nan=True, allow_infinity=True),
        st.sampled_from([-1, -8, -9, 997, ".a", ".z"]), st.text(max_size=6), st.booleans(),
        st.sampled_from(["2026-03-01", "2026-13-45", "1", " ", ""]),
    )


@st.composite
def columns(draw, n):
    form = draw(st.sampled_from(["int", "float", "codes", "blank", "text", "mixed", "bool", "date"]))
    if form == "int":
        return pd.Series(draw(st.lists(st.integers(-10, 100), min_size=n, max_size=n)), dtype="int64")
    if form == "float":
        return pd.Series(draw(st.lists(st.floats(-10, 100) | st.just(np.nan), min_size=n, max_size=n)),
                         dtype="float64")
    if form == "codes":
        return pd.Series(draw(st.lists(st.sampled_from([1, 2, 3, -1, -8, -9, None]), min_size=n, max_size=n)),
                         dtype="float64")
    if form == "blank":
        return pd.Series([np.nan] * n, dtype="float64")
    if form == "text":
        return pd.Series(draw(st.lists(st.text(max_size=5) | st.none(), min_size=n, max_size=n)), dtype="str")
    if form == "bool":
        return pd.Series(draw(st.lists(st.booleans(), min_size=n, max_size=n)))
    if form == "date":
        days = draw(st.lists(st.integers(0, 800) | st.none(), min_size=n, max_size=n))
        return pd.Series([pd.NaT if d is None else pd.Timestamp("2025-06-01") + pd.Timedelta(days=d)
                          for d in days])
    return pd.Series(draw(st.lists(cell_values(), min_size=n, max_size=n)), dtype=object)


FIXED_Q = loads_questionnaire("""\
format: 1
survey: {name: fuzz, case_id: id}
context: [region]
codes:
  - {value: -1, reason: not_asked, kind: structural}
  - {value: -8, reason: dont_know, kind: nonresponse}
  - {value: -9, reason: refused, kind: nonresponse}
sections:
  - name: a
    items:
      - {name: age, type: integer, range: [16, 99]}
      - {name: work, type: categorical, values: {1: "Yes", 2: "No"}}
      - {name: hours, type: number, range: [1, 80], asked_if: work == 1 and age < 70}
      - {name: sat, type: categorical, values: {1: Low, 2: Mid, 3: High}, asked_if: 'not has_code(work, "refused")'}
      - {name: modes, type: multi, options: {car: Car, bus: Bus}, asked_if: answered(hours) or region == 2}
      - {name: visit, type: date, range: [2025-01-01, 2026-12-31]}
      - {name: note, type: text, asked_if: "sat in [1, 2] or hours / 2 > 10"}
""", file="fixed.yaml")
FIXED_COLUMNS = ["id", "region", "age", "work", "hours", "sat", "modes_car", "modes_bus", "visit", "note"]


@st.composite
def frames(draw, wanted):
    n = draw(st.integers(0, 12))
    dropped = draw(st.sampled_from([None] * (2 * len(wanted)) + wanted))  # now and then a column is missing
    chosen = [c for c in wanted if c != dropped]
    chosen += draw(st.lists(st.sampled_from(["extra", "wt", "id"]), max_size=2, unique=True))
    data = {c: draw(columns(n)) for c in dict.fromkeys(chosen)}
    if "id" in data and draw(st.booleans()):
        data["id"] = pd.Series(range(n))  # usually unique ids, sometimes random ones
    return pd.DataFrame(data)


def check_classification(cl, frame, q) -> None:
    assert cl.status.shape == (len(frame), len(q.items))
    assert list(cl.status.columns) == [it.name for it in q.items]
    seen = set(pd.unique(cl.status.astype(object).to_numpy().ravel()))
    reasons = {c.reason for it in q.items for c in it.codes}
    assert seen <= FIXED_STATUSES | reasons, seen


@settings(max_examples=examples(60), **SETTINGS)
@given(frames(FIXED_COLUMNS))
def test_random_frames_classify_or_raise_skipwise_error(frame):
    try:
        cl = classify(frame, FIXED_Q)
    except SkipwiseError as err:
        assert err.problems
    else:
        check_classification(cl, frame, FIXED_Q)


@settings(max_examples=examples(12), **SETTINGS)
@given(frames(FIXED_COLUMNS), st.sampled_from([None, "wt", "age"]), st.sampled_from([(), ("region",), ("work",)]))
def test_random_frames_report_or_raise_skipwise_error(frame, weight, by):
    with tempfile.TemporaryDirectory() as tmp:
        out = Path(tmp) / "report.xlsx"
        try:
            write_item_report(frame, FIXED_Q, out, weight=weight, by=by)
        except SkipwiseError as err:
            assert err.problems
            assert not out.exists()
        else:
            assert out.stat().st_size > 0
        assert not [p for p in Path(tmp).iterdir() if ".part" in p.name]


# -- random questionnaires (and their rules) on random data -----------------------------------
@st.composite
def loaded_with_frame(draw):
    text = draw(questionnaire_texts(mutate=False))
    try:
        q = loads_questionnaire(text, file="fuzz.yaml")
    except SkipwiseError:
        q = None
    wanted = ["id"] + CONTEXT + ([c for it in q.items for c in it.columns] if q else [])
    return q, draw(frames(wanted))


@settings(max_examples=examples(60), **SETTINGS)
@given(loaded_with_frame())
def test_random_rules_classify_or_raise_skipwise_error(pair):
    q, frame = pair
    if q is None:
        return
    try:
        cl = classify(frame, q)
    except SkipwiseError as err:
        assert err.problems
    else:
        check_classification(cl, frame, q)


# -- random CSV files through the command line ------------------------------------------------
FIXED_TEXT = Path(__file__).parent / "bad_inputs" / "good_q.yaml"


@settings(max_examples=examples(15), **SETTINGS)
@given(frames(["id", "region", "base_wt", "disp", "age", "employed", "hours", "sat"]),
       st.lists(st.tuples(st.integers(0, 400), st.binary(min_size=1, max_size=3)), max_size=2))
def test_random_csv_through_cli_exits_0_or_1(frame, damage):
    from typer.testing import CliRunner

    from skipwise.cli import app

    raw = bytearray(frame.to_csv(index=False).encode("utf-8"))
    for at, junk in damage:  # bytes spliced in: broken quotes, stray separators, invalid UTF-8
        raw[at:at] = junk
    with tempfile.TemporaryDirectory() as tmp:
        data = Path(tmp) / "data.csv"
        data.write_bytes(bytes(raw))
        for args in (["check", str(data), "-q", str(FIXED_TEXT)],
                     ["classify", str(data), "-q", str(FIXED_TEXT), "-o", str(Path(tmp) / "out.csv")]):
            result = CliRunner().invoke(app, args)
            assert result.exit_code in (0, 1), (args[0], result.output, result.exception)
            assert result.exception is None or isinstance(result.exception, SystemExit), repr(result.exception)
            assert "Traceback" not in result.output
        assert not [p for p in Path(tmp).iterdir() if ".part" in p.name]


# -- validation: column templates, labels and YAML aliases --------------------------------------
# Outside references: YAML 1.2.2 section 10.3.2 (core schema: a plain scalar that is not
# true/false/null/an integer/a float is a string, its characters as written); the template
# language of docs/questionnaire-format.md, re-implemented here by str.replace.
from skipwise.questionnaire.templates import expand, template_problem  # noqa: E402
from skipwise.questionnaire.yamlread import MAX_ALIAS_NODES, load_yaml_text  # noqa: E402

TEMPLATE_BITS = st.sampled_from(["{item}", "{option}", "{n}", "{", "}", "{0}", "{item.x}", "{item:>9}",
                                 "{option!r}", "_", "a", "9", ".", ":", "{{", "}}", "{ITEM}", "é"])


@settings(max_examples=examples(120), **SETTINGS)
@given(bits=st.lists(TEMPLATE_BITS, max_size=8), item=st.text(max_size=6), option=st.text(max_size=6))
def test_fuzz_column_templates_are_plain_text_substitution(bits, item, option):
    pattern = "".join(bits)
    why = template_problem(pattern, ("item", "option"), ("item", "option"))
    if why is None:
        assert "{item}" in pattern and "{option}" in pattern
        # the reference: every placeholder replaced as text, from left to right, nothing else read
        parts = pattern.split("{item}")
        reference = item.join(p.replace("{option}", option) for p in parts)
        assert expand(pattern, item=item, option=option) == reference
    else:
        assert isinstance(why, str) and "{item}, {option}" in why


@settings(max_examples=examples(60), **SETTINGS)
@given(bits=st.lists(TEMPLATE_BITS, max_size=6))
def test_fuzz_templates_through_the_loader(bits):
    pattern = "".join(bits).replace("'", "''")
    text = ("format: 1\nsurvey: {name: t, case_id: id}\nsections:\n  - name: s\n    items:\n"
            f"      - {{name: modes, type: multi, column: '{pattern}', options: {{car: Car, bus: Bus}}}}\n")
    try:
        q = loads_questionnaire(text)
    except SkipwiseError as err:
        assert all(p.line is not None for p in err.problems)
        return
    cols = q.item("modes").columns
    assert len(set(cols)) == 2 and all(len(c) <= len(pattern) + 10 for c in cols)


LABEL_TOKENS = st.sampled_from(["Yes", "No", "on", "OFF", "y", "2024", "1.50", "0x1F", "012", "1_000", "1:20",
                                "2024-01-01", "true", "False", ".inf", "-5", "Don't know", "=1+1", "a b"])


@settings(max_examples=examples(60), **SETTINGS)
@given(label=LABEL_TOKENS, value_label=LABEL_TOKENS)
def test_fuzz_labels_are_the_text_written(label, value_label):
    def plain(token: str) -> str:  # a plain scalar, quoted only where YAML syntax needs it
        return f'"{token}"' if token.startswith(("'", '"')) else token

    text = ("format: 1\nsurvey: {name: t, case_id: id}\nsections:\n  - name: s\n    items:\n"
            f"      - name: q\n        type: categorical\n        label: {plain(label)}\n"
            f"        values:\n          1: {plain(value_label)}\n")
    q = loads_questionnaire(text)
    assert q.item("q").label == label and q.item("q").values[1] == value_label


@settings(max_examples=examples(40), **SETTINGS)
@given(width=st.integers(1, 12), depth=st.integers(1, 8))
def test_fuzz_alias_expansion_is_bounded(width, depth):
    lines = ["a0: &a0 [x]"] + [f"a{i}: &a{i} [" + ", ".join([f"*a{i - 1}"] * width) + "]" for i in range(1, depth + 1)]
    # nodes the aliases repeat, counted independently: each alias of level i-1 repeats its whole tree
    size = [2]  # a0: the list and its one text
    for _ in range(depth):
        size.append(1 + width * size[-1])
    repeated = sum(width * size[i - 1] for i in range(1, depth + 1))
    try:  # expanding the refused ones would take minutes and gigabytes: the test would not end
        doc = load_yaml_text("\n".join(lines) + "\n", "a.yaml")
    except SkipwiseError as err:
        assert repeated > MAX_ALIAS_NODES, (width, depth, repeated)
        assert err.problems[0].line is not None and "aliases repeat" in err.problems[0].message
    else:
        assert repeated <= MAX_ALIAS_NODES
        assert len(doc) == depth + 1
