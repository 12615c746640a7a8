"""The run plan file: keys, defaults, paths relative to the plan, every problem with its line."""

from __future__ import annotations

import textwrap

import pytest

from skipwise.errors import ProblemCode, SkipwiseError
from skipwise.pipeline.plan import load_run_plan


def _write(folder, text: str):
    path = folder / "plan.yaml"
    path.write_text(textwrap.dedent(text), encoding="utf-8")
    return path


@pytest.fixture()
def inputs(tmp_path):
    (tmp_path / "in").mkdir()
    for name in ("data.csv", "q.yaml", "w.yaml"):
        (tmp_path / "in" / name).write_text("x\n")
    return tmp_path


def test_minimal_plan_defaults_and_relative_paths(inputs):
    plan = load_run_plan(_write(inputs, """\
        format: 1
        data: in/data.csv
        questionnaire: in/q.yaml
        output: {folder: out}
        """))
    assert plan.data == (inputs / "in" / "data.csv").resolve()
    assert plan.output.folder == (inputs / "out").resolve()
    assert plan.output.name == "data"
    assert plan.formats("status_columns") == ("csv", "parquet")  # 'input' is the data's own format
    assert plan.stop_on_check_error is False
    assert plan.report is not None and plan.diagnose is not None  # on unless switched off
    assert plan.weighting_plan is None and plan.imputation_plan is None
    resolved = plan.resolved()
    assert resolved["data"].startswith("/") and resolved["weighting"] is None


def test_steps_can_be_switched_off_and_options_read(inputs):
    plan = load_run_plan(_write(inputs, """\
        format: 1
        data: in/data.csv
        questionnaire: in/q.yaml
        check: {stop_on_error: true}
        report: {weight: w, by: district, case_ids: false}
        diagnose: false
        weighting: {plan: in/w.yaml}
        output: {folder: out, name: final, status_columns: [input, parquet, sav], recoded: [dta]}
        """))
    assert plan.stop_on_check_error is True
    assert plan.report.by == ("district",) and plan.report.case_ids is False and plan.report.weight == "w"
    assert plan.diagnose is None
    assert plan.weighting_plan.name == "w.yaml" and plan.weighting_data is None
    assert plan.formats("status_columns") == ("csv", "parquet", "sav") and plan.formats("recoded") == ("dta",)


def test_every_problem_reported_once_with_its_line(inputs):
    path = _write(inputs, """\
        format: 1
        data: in/nothere.sav
        questionaire: in/q.yaml
        check: {stop_on_eror: true}
        report: {by: [district], case_ids: maybe}
        weighting: {plan: in/missing.yaml}
        output:
          folder: out
          status_columns: [input, spss]
        """)
    with pytest.raises(SkipwiseError) as info:
        load_run_plan(path)
    err = info.value
    rows = {(p.code, p.line) for p in err.problems}
    assert (ProblemCode.FILE_NOT_FOUND, 2) in rows          # data file missing, at its line
    assert (ProblemCode.UNKNOWN_KEY, 3) in rows             # questionaire
    assert (ProblemCode.MISSING_KEY, 1) in rows             # so 'questionnaire' is missing
    assert (ProblemCode.UNKNOWN_KEY, 4) in rows             # stop_on_eror
    assert (ProblemCode.BAD_VALUE, 5) in rows               # case_ids: maybe
    assert (ProblemCode.FILE_NOT_FOUND, 6) in rows          # weighting plan missing
    assert (ProblemCode.BAD_VALUE, 9) in rows               # unknown format 'spss'
    text = err.render()
    assert "did you mean 'questionnaire'?" in text and "did you mean 'stop_on_error'?" in text
    assert f"{path}:2" in text and "weighting.plan" in text
    assert text.startswith("7 problem(s) in run plan")


@pytest.mark.parametrize("text, code", [
    ("format: 2\ndata: in/data.csv\nquestionnaire: in/q.yaml\noutput: {folder: out}\n", ProblemCode.FORMAT_VERSION),
    ("format: 1\ndata: in/data.csv\nquestionnaire: in/q.yaml\n", ProblemCode.MISSING_KEY),
    ("format: 1\ndata: in/q.yaml\nquestionnaire: in/q.yaml\noutput: {folder: out}\n", ProblemCode.FILE_FORMAT),
    ("format: 1\ndata: [in/data.csv\n", ProblemCode.YAML_SYNTAX),
    ("- just\n- a list\n", ProblemCode.BAD_VALUE),
    ("format: 1\ndata: in/data.csv\nquestionnaire: in/q.yaml\nimputation: {seed: 3}\noutput: {folder: out}\n",
     ProblemCode.UNKNOWN_KEY),
], ids=["format", "no-output", "data-not-survey-file", "yaml", "not-a-mapping", "imputation-without-plan"])
def test_single_problems(inputs, text, code):
    with pytest.raises(SkipwiseError) as info:
        load_run_plan(_write(inputs, text))
    assert code in info.value.codes


def test_missing_plan_file(tmp_path):
    with pytest.raises(SkipwiseError) as info:
        load_run_plan(tmp_path / "nope.yaml")
    assert info.value.codes == [ProblemCode.FILE_NOT_FOUND]


def test_engine_key_read_and_checked_against_the_steps_it_supports(inputs):
    # docs/scale.md: engine: {kind: dask, scheduler: ..., partition_rows: ...}; dask writes Parquet or CSV only
    plan = load_run_plan(_write(inputs, """\
        format: 1
        data: in/data.csv
        questionnaire: in/q.yaml
        diagnose: false
        engine: {kind: dask, scheduler: "tcp://10.0.0.5:8786", partition_rows: 5000}
        output: {folder: out, status_columns: [parquet]}
        """))
    assert (plan.engine.kind, plan.engine.scheduler, plan.engine.partition_rows) == ("dask", "tcp://10.0.0.5:8786",
                                                                                     5000)
    assert plan.resolved()["engine"]["partition_rows"] == 5000
    assert load_run_plan(_write(inputs, """\
        format: 1
        data: in/data.csv
        questionnaire: in/q.yaml
        output: {folder: out}
        """)).engine.kind == "memory"
    with pytest.raises(SkipwiseError) as info:
        load_run_plan(_write(inputs, """\
            format: 1
            data: in/data.csv
            questionnaire: in/q.yaml
            engine:
              kind: dusk
              partiton_rows: 10
            output: {folder: out, status_columns: [sav]}
            """))
    lines = {(p.code, p.line) for p in info.value.problems}
    assert (ProblemCode.BAD_VALUE, 5) in lines and (ProblemCode.UNKNOWN_KEY, 6) in lines
    with pytest.raises(SkipwiseError) as info:
        load_run_plan(_write(inputs, """\
            format: 1
            data: in/data.csv
            questionnaire: in/q.yaml
            engine: dask
            output: {folder: out, status_columns: [sav]}
            """))
    text = " ".join(p.message for p in info.value.problems)
    # diagnose (on by default) runs on the dask engine's gathered columns since stage 3 of the engine
    # in run (docs/scale.md); the Parquet-or-CSV rule stays
    assert "names sav" in text and "diagnose" not in text
