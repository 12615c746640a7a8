"""`skipwise run` end to end on a tiny invented plan: every file, hashes, codebook, overwrite, interruption."""

from __future__ import annotations

import hashlib
import json
from html.parser import HTMLParser

import numpy as np
import pandas as pd
import pyreadstat
import pytest
from typer.testing import CliRunner

from skipwise.cli import app

runner = CliRunner()

Q = """\
format: 1
survey: {name: pond-2026, title: Pond Street Residents Survey 2026, case_id: id}
context: [area, sel_prob, disposition]
codes:
  - {value: -1, reason: routed_out, kind: structural}
  - {value: -9, reason: refused, kind: nonresponse}
sections:
  - name: main
    items:
      - {name: pet, label: Keeps a pet, type: categorical, values: {1: "Yes", 2: "No"}}
      - {name: pets, label: Number of pets, type: integer, range: [1, 9], asked_if: pet == 1}
      - {name: mood, label: Mood today, type: integer, range: [0, 10], text: "How is your mood today, from 0 to 10?"}
"""
WEIGHTS = """\
format: 1
case_id: id
dispositions:
  column: disposition
  categories: {I: [1], R: [2]}
base: {probability: sel_prob}
nonresponse: {method: classes, classes: [area], min_respondents: 2}
calibration:
  method: rake
  margins:
    area: {1: 500, 2: 700}
"""
IMPUTE = """\
format: 1
imputations: 2
seed: 11
default: {method: hotdeck, classes: [area]}
output: {form: stacked}
"""
PLAN = """\
format: 1
data: in/pond.sav
questionnaire: in/q.yaml
report: {by: [area]}
diagnose: {aux: [area]}
weighting: {plan: in/weights.yaml, data: in/frame.csv}
imputation: {plan: in/impute.yaml}
output: {folder: package, name: pond, recoded: [dta], imputed_format: parquet}
"""


def _project(root):
    """Tiny invented survey: 40 interviews of a 50-address frame, .sav with labels and missing codes."""
    rng = np.random.default_rng(5)
    inp = root / "in"
    inp.mkdir(parents=True)
    n = 40
    pet = rng.choice([1.0, 2.0], n)
    pets = np.where(pet == 1, rng.integers(1, 4, n), -1).astype(float)
    pets[[0, 5]] = np.where(pet[[0, 5]] == 1, -9.0, -1.0)
    mood = rng.integers(0, 11, n).astype(float)
    mood[[2, 3]] = -9.0
    mood[7] = np.nan
    data = pd.DataFrame({"id": np.arange(1.0, n + 1), "area": rng.choice([1.0, 2.0], n), "sel_prob": 0.05,
                         "disposition": 1.0, "pet": pet, "pets": pets, "mood": mood})
    pyreadstat.write_sav(data, str(inp / "pond.sav"),
                         column_labels={"id": "Case id", "area": "Area", "pet": "Keeps a pet",
                                        "pets": "Number of pets", "mood": "Mood today"},
                         variable_value_labels={"pet": {1: "Yes", 2: "No", -9: "Refused"},
                                                "area": {1: "North", 2: "South"}},
                         missing_ranges={"pets": [-9, -1], "mood": [-9]})
    frame = pd.DataFrame({"id": np.arange(1, 51), "area": np.r_[data["area"].astype(int), rng.choice([1, 2], 10)],
                          "sel_prob": 0.05, "disposition": np.r_[np.ones(n, int), 2 * np.ones(10, int)]})
    frame.to_csv(inp / "frame.csv", index=False)
    for name, text in (("q.yaml", Q), ("weights.yaml", WEIGHTS), ("impute.yaml", IMPUTE)):
        (inp / name).write_text(text, encoding="utf-8")
    (root / "plan.yaml").write_text(PLAN, encoding="utf-8")
    return root / "plan.yaml"


def _sha(path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


@pytest.fixture(scope="module")
def ran(tmp_path_factory):
    root = tmp_path_factory.mktemp("run")
    plan = _project(root)
    before = {p.name: _sha(p) for p in (root / "in").iterdir()}
    result = runner.invoke(app, ["run", str(plan)])
    assert result.exit_code == 0, result.output
    return root, result.output, before


EXPECTED = ["pond.sav", "pond.parquet", "pond_coded.dta", "pond_faults.csv", "item_report.xlsx",
            "diagnostics.xlsx", "weighting.xlsx", "frame_weighted.csv", "frame_weighted.parquet",
            "pond_imputed.parquet", "codebook.md", "codebook.html", "codebook.xml", "manifest.json"]


def test_run_writes_every_file_and_shows_each_step(ran):
    root, output, _ = ran
    assert sorted(p.name for p in (root / "package").iterdir()) == sorted(EXPECTED)
    for step in ("read", "check", "classify", "join", "weigh", "report", "diagnose", "impute", "export"):
        assert f"] {step}:" in output
    assert "not at random" in output


def test_final_data_keeps_labels_and_missing_definitions_and_adds_status_and_weights(ran):
    root, _, _ = ran
    # Read back with pyreadstat itself, not through skipwise.
    df, meta = pyreadstat.read_sav(str(root / "package/pond.sav"), user_missing=True)
    original, _ = pyreadstat.read_sav(str(root / "in/pond.sav"), user_missing=True)
    assert list(df.columns[:7]) == list(original.columns)
    pd.testing.assert_frame_equal(df[original.columns], original, check_dtype=False)
    assert meta.variable_value_labels["pet"] == {1.0: "Yes", 2.0: "No", -9.0: "Refused"}
    assert meta.column_names_to_labels["mood"] == "Mood today"
    assert meta.missing_ranges["mood"] == [{"lo": -9.0, "hi": -9.0}]
    assert {"pet_status", "pets_status", "mood_status", "wt_final"} <= set(df.columns)
    labels = meta.variable_value_labels["mood_status"]
    assert df.loc[df["mood"] == -9, "mood_status"].eq(12).all()  # refused: built-in number 12 (docs/statuses.md)
    assert labels[12] == "Refused (nonresponse)"
    # Raking reproduces the control totals (Deming & Stephan 1940: calibrated margins equal the totals);
    # all 40 interviews respond, so the data file carries every respondent's weight.
    np.testing.assert_allclose(df.groupby("area")["wt_final"].sum().to_numpy(), [500, 700], rtol=1e-8)
    parquet = pd.read_parquet(root / "package/pond.parquet")
    np.testing.assert_allclose(parquet["wt_final"].to_numpy(), df["wt_final"].to_numpy(), rtol=0)
    # Recoded copy in Stata: pandas' own reader sees the status codes as missing.
    coded = pd.read_stata(root / "package/pond_coded.dta", convert_categoricals=False)
    assert coded.loc[df["mood"].isna().to_numpy() | (df["mood"] == -9).to_numpy(), "mood"].isna().all()


def test_weighting_frame_and_imputed_file(ran):
    root, _, _ = ran
    frame = pd.read_csv(root / "package/frame_weighted.csv")
    assert len(frame) == 50 and (frame.loc[frame["disposition"] == 2, "wt_final"] == 0).all()
    imputed = pd.read_parquet(root / "package/pond_imputed.parquet")
    assert len(imputed) == 80 and sorted(imputed["imputation"].unique()) == [1, 2]
    assert {"mood_imp", "wt_final"} <= set(imputed.columns)
    # Refusals and the blank of mood are filled with valid values in each completed file.
    filled = imputed.loc[imputed["mood_imp"] == 1, "mood"]
    assert len(filled) == 2 * 3 and filled.between(0, 10).all()


def test_manifest_hashes_match_hashlib(ran):
    root, _, before = ran
    doc = json.loads((root / "package/manifest.json").read_text())
    outputs = {o["file"]: o for o in doc["outputs"]}
    assert sorted(outputs) == sorted(n for n in EXPECTED if n != "manifest.json")
    for name, rec in outputs.items():
        path = root / "package" / name
        assert rec["sha256"] == _sha(path) and rec["bytes"] == path.stat().st_size, name
    inputs = {o["role"]: o for o in doc["inputs"]}
    assert set(inputs) == {"run_plan", "data", "questionnaire", "weighting_plan", "weighting_data", "imputation_plan"}
    for rec in inputs.values():
        assert rec["sha256"] == hashlib.sha256(open(rec["file"], "rb").read()).hexdigest()
    assert doc["plan"]["data"] == str((root / "in/pond.sav").resolve())
    assert doc["seeds"]["imputation"] == 11
    steps = [s["step"] for s in doc["steps"]]
    assert steps[:10] == ["plan", "read", "check", "classify", "join", "weigh", "report", "diagnose", "impute", "export"]
    assert all(s["seconds"] >= 0 and s["status"] == "done" for s in doc["steps"])


def test_inputs_unchanged(ran):
    root, _, before = ran
    assert {p.name: _sha(p) for p in (root / "in").iterdir()} == before


class _Collect(HTMLParser):
    def __init__(self):
        super().__init__()
        self.stack, self.text, self.errors = [], [], []

    def handle_starttag(self, tag, attrs):
        if tag not in ("meta", "br"):
            self.stack.append(tag)

    def handle_endtag(self, tag):
        if not self.stack or self.stack.pop() != tag:
            self.errors.append(tag)

    def handle_data(self, data):
        self.text.append(data)


def test_codebook_lists_every_output_variable(ran):
    root, _, _ = ran
    md = (root / "package/codebook.md").read_text()
    html_text = (root / "package/codebook.html").read_text()
    parser = _Collect()
    parser.feed(html_text)
    assert parser.errors == [] and parser.stack == []  # every tag closed, in order (stdlib html.parser)
    shown = "".join(parser.text)
    columns = pd.read_parquet(root / "package/pond.parquet").columns
    for col in columns:
        assert f"`{col}`" in md, col
        assert col in shown, col
    assert "mood_imp" in md and "asked_if: pet == 1" in md and "special code: refused (nonresponse, status 12)" in md
    # mood: 40 cases in universe, 2 refused + 1 blank = 3 nonresponse -> 7.5% (docs/contract.md §2 rate, by hand)
    mood = md[md.index("### `mood`"):]
    assert "| D: in universe, excluding break-off and optional blanks | 40 |" in mood
    assert "| item nonresponse rate | 7.5% |" in mood and "|   of which refused | 5.0% |" in mood
    assert "weighted (wt_final)" in md and "Calibration (rake)" in md and "2 imputation(s), seed 11" in md
    assert "How is your mood today, from 0 to 10?" in md and "How is your mood today, from 0 to 10?" in shown


def test_existing_outputs_need_overwrite_and_are_listed_together(ran):
    root, _, _ = ran
    stamp = {p.name: _sha(p) for p in (root / "package").iterdir()}
    result = runner.invoke(app, ["run", str(root / "plan.yaml")])
    assert result.exit_code == 1
    assert f"{len(EXPECTED)} output file(s) of the run are in the way" in result.output
    assert "pond.sav" in result.output and "manifest.json" in result.output and "Traceback" not in result.output
    assert {p.name: _sha(p) for p in (root / "package").iterdir()} == stamp  # nothing touched
    again = runner.invoke(app, ["run", str(root / "plan.yaml"), "--overwrite"])
    assert again.exit_code == 0, again.output
    # Same seed, same inputs: the imputed Parquet file comes out byte for byte the same (an SPSS file
    # differs only in its header's creation time, so compare what pyreadstat reads).
    assert _sha(root / "package/pond_imputed.parquet") == stamp["pond_imputed.parquet"]
    doc = json.loads((root / "package/manifest.json").read_text())
    assert {o["file"]: o["sha256"] for o in doc["outputs"]}["pond.sav"] == _sha(root / "package/pond.sav")


def _leftovers(folder):
    return [p for p in folder.rglob("*") if ".part" in p.name or p.name.startswith(".skipwise-run-")]


def test_interrupted_run_leaves_no_file(tmp_path, monkeypatch):
    plan = _project(tmp_path)
    before = {p.name: _sha(p) for p in (tmp_path / "in").iterdir()}
    from skipwise.io import writers

    real = writers._prepare_parquet

    def broken(df, meta, path, fmt):  # the imputed Parquet file dies halfway through writing
        job = real(df, meta, path, fmt)

        def half(tmp):
            job(tmp)
            raise KeyboardInterrupt("interrupted")
        return half if "imputed" in path.name else job

    monkeypatch.setitem(writers._PREPARE, "parquet", broken)
    with pytest.raises(KeyboardInterrupt):
        from skipwise.pipeline import run_plan

        run_plan(plan)
    assert not (tmp_path / "package").exists()  # the folder it created is gone, no partial files
    assert _leftovers(tmp_path) == []
    assert {p.name: _sha(p) for p in (tmp_path / "in").iterdir()} == before


def test_failing_step_is_named_and_keeps_the_old_package(tmp_path):
    plan = _project(tmp_path)
    assert runner.invoke(app, ["run", str(plan)]).exit_code == 0
    stamp = {p.name: _sha(p) for p in (tmp_path / "package").iterdir()}
    (tmp_path / "in/impute.yaml").write_text(IMPUTE.replace("classes: [area]", "classes: [arae]"))
    result = runner.invoke(app, ["run", str(plan), "--overwrite"])
    assert result.exit_code == 1
    assert "run stopped at step 'read'" in result.output and "impute.yaml:4" in result.output and "did you mean 'area'?" in result.output
    assert {p.name: _sha(p) for p in (tmp_path / "package").iterdir()} == stamp
    assert _leftovers(tmp_path) == []


@pytest.mark.parametrize("stop, code", [(False, 0), (True, 1)], ids=["report-and-go-on", "stop"])
def test_check_errors_stop_the_run_only_when_asked(tmp_path, stop, code):
    plan = _project(tmp_path)
    df, meta = pyreadstat.read_sav(str(tmp_path / "in/pond.sav"), user_missing=True)
    df.loc[4, "mood"] = 42  # outside the range and no declared code: a check error
    pyreadstat.write_sav(df, str(tmp_path / "in/pond.sav"), column_labels=meta.column_names_to_labels)
    text = plan.read_text().replace("format: 1\n", f"format: 1\ncheck: {{stop_on_error: {str(stop).lower()}}}\n")
    plan.write_text(text)
    result = runner.invoke(app, ["run", str(plan)])
    assert result.exit_code == code, result.output
    assert "undeclared-value" in result.output
    if stop:
        assert "run stopped at step 'check'" in result.output and not (tmp_path / "package").exists()
    else:
        assert (tmp_path / "package/manifest.json").exists()


def test_plan_problems_exit_1_with_lines(tmp_path):
    plan = _project(tmp_path)
    plan.write_text(PLAN.replace("report:", "reprot:").replace("in/q.yaml", "in/nothere.yaml"))
    result = runner.invoke(app, ["run", str(plan)])
    assert result.exit_code == 1 and "Traceback" not in result.output
    assert f"{plan}:3" in result.output and f"{plan}:4" in result.output
    assert "did you mean 'report'?" in result.output
    assert not (tmp_path / "package").exists()
