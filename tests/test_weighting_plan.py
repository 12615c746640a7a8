"""Reading the weighting plan file: repeated keys, unreadable files, lines kept.

What is checked is the YAML 1.2 rule that mapping keys are unique ("The content of a mapping
node is an unordered set of key/value node pairs, with the restriction that each of the keys
is unique" [memory: YAML 1.2 spec, section 3.2.1.1]): PyYAML accepts a repeated key and keeps
the second, so the plan reader must report it.  Byte 0xE9 alone is not well-formed UTF-8
(Unicode Standard, UTF-8 well-formed byte sequences).
"""

from __future__ import annotations

import pytest

from skipwise.errors import ProblemCode, SkipwiseError
from skipwise.weighting.plan import WeightingPlan, load_plan, parse_plan
from skipwise.weighting.specs import nearest_line

BASE = "format: 1\ndispositions:\n  column: dispo\n  categories: {I: [1], R: [2]}\n"


def _rows(text: str) -> list[tuple[str, int | None, str | None]]:
    with pytest.raises(SkipwiseError) as info:
        load_plan(text=text)
    return [(r["code"], r["line"], r["item"]) for r in info.value.to_rows()]


def test_two_trimming_blocks_are_reported_with_the_second_line():
    text = BASE + "trimming:\n  median_multiple: 3.5\ntrimming:\n  median_multiple: 5\n"
    assert _rows(text) == [("duplicate-name", 7, "trimming")]


def test_repeated_nested_key_and_other_problems_are_collected_together():
    text = BASE + "nonresponse:\n  classes: [a]\n  max_factor: 2\n  max_factor: 0.5\ncalibraton: {}\n"
    rows = _rows(text)
    assert ("duplicate-name", 8, "nonresponse.max_factor") in rows
    assert ("unknown-key", 9, "calibraton") in rows
    assert ("bad-value", 8, "nonresponse.max_factor") in rows  # the kept (second) value is still checked
    with pytest.raises(SkipwiseError) as info:
        load_plan(text=text)
    dup = [p for p in info.value.problems if p.code == ProblemCode.DUPLICATE_NAME][0]
    assert dup.message == "key 'max_factor' is given twice" and "keep one" in dup.hint


def test_repeated_margin_category_is_reported():
    text = BASE + "calibration:\n  margins:\n    g: {a: 10, b: 20, a: 30}\n"
    assert _rows(text) == [("duplicate-name", 7, "calibration.margins.g.a")]


def test_lines_of_keys_and_list_entries():
    plan = load_plan(text=BASE + "estimates:\n  means:\n    - y\n    - z\n")
    assert plan.line("dispositions", "column") == 3
    assert plan.lines[("estimates", "means", 1)] == 8
    assert plan.line("estimates", "means", 7) == 6  # unknown entry: nearest known parent
    assert nearest_line(plan.lines, ("nowhere",)) is None
    assert isinstance(plan, WeightingPlan) and plan.estimates.means == ("y", "z")


def test_parse_plan_takes_plain_objects_and_explicit_lines():
    raw = {"format": 1, "dispositions": {"column": "d", "categories": {"I": [1]}}}
    plan = parse_plan(raw, file="p.yaml", lines={("dispositions",): 2})
    assert plan.line("dispositions", "column") == 2 and plan.file == "p.yaml"


@pytest.mark.parametrize("make, code", [
    (lambda tmp: tmp / "missing.yaml", ProblemCode.FILE_NOT_FOUND),
    (lambda tmp: tmp, ProblemCode.FILE_UNREADABLE),  # a folder, not a file
    (lambda tmp: (tmp / "cp.yaml").write_bytes(b"format: 1\n# caf\xe9\n") and tmp / "cp.yaml",
     ProblemCode.FILE_UNREADABLE),
], ids=["not-found", "directory", "not-utf8"])
def test_unreadable_plan_files_are_user_errors(tmp_path, make, code):
    path = make(tmp_path)
    with pytest.raises(SkipwiseError) as info:
        load_plan(path)
    assert info.value.codes == [code]
    assert info.value.problems[0].file == str(path)


def test_plan_file_read_from_disk_keeps_its_name(tmp_path):
    path = tmp_path / "plan.yaml"
    path.write_text(BASE + "trimming:\n  percentile: 99\n", encoding="utf-8")
    plan = load_plan(path)
    assert plan.file == str(path) and plan.trimming.percentile == 99.0 and plan.line("trimming") == 5
