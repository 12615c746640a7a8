"""The command line: help on every command, exit statuses, the classify command's outputs."""

from __future__ import annotations

import subprocess
import sys
import textwrap

import pandas as pd
import pyreadstat
import pytest
from typer.testing import CliRunner

from skipwise.cli import app

runner = CliRunner()
COMMANDS = ["draft", "check", "classify", "report", "diagnose", "weigh", "impute", "run", "demo"]

Q = textwrap.dedent("""\
    format: 1
    survey: {name: t, case_id: id}
    codes: [{value: -1, reason: na, kind: structural}, {value: -9, reason: refused, kind: nonresponse}]
    sections:
      - name: s
        items:
          - {name: gate, type: categorical, values: {1: "Yes", 2: "No"}}
          - {name: amount, type: integer, range: [0, 10], asked_if: gate == 1}
    """)


@pytest.mark.parametrize("command", COMMANDS)
def test_every_command_has_help(command):
    result = runner.invoke(app, [command, "--help"])
    assert result.exit_code == 0
    assert "Usage" in result.output and len(result.output.splitlines()) > 5


def test_root_help_lists_commands_and_cautions():
    result = runner.invoke(app, ["--help"])
    assert result.exit_code == 0
    for command in COMMANDS:
        assert command in result.output
    assert "not at random" in result.output


@pytest.fixture()
def files(tmp_path):
    q = tmp_path / "q.yaml"
    q.write_text(Q)
    data = tmp_path / "data.csv"
    pd.DataFrame({"id": [1, 2, 3, 4], "gate": [1, 2, 1, -9], "amount": [5, 3, -9, None]}).to_csv(data, index=False)
    return tmp_path, q, data


def test_classify_writes_status_columns_and_faults(files):
    tmp, q, data = files
    out = tmp / "out.sav"
    result = runner.invoke(app, ["classify", str(data), "-q", str(q), "-o", str(out)])
    assert result.exit_code == 0, result.output
    # Read back with pyreadstat directly, not through skipwise.
    frame, meta = pyreadstat.read_sav(str(out))
    # docs/contract.md §1 numbers: answered 1, off_route 6, refused 12 (built-in, docs/statuses.md), gate_unknown 4
    assert frame["amount_status"].tolist() == [1, 6, 12, 4]
    # the status in words, as in every format (the report's labels, skipwise.rates.STATUS_LABELS)
    assert meta.variable_value_labels["amount_status"][6.0] == "Answer or code where not asked (routing fault)"
    # docs/contract.md §5: the listing of x.sav is x.sav.faults.csv; its case id column keeps the data's name.
    faults = pd.read_csv(tmp / "out.sav.faults.csv")
    assert faults[["id", "item", "status", "value", "inputs"]].values.tolist() == [
        [2, "amount", "off_route", 3, "gate=2"]]
    # An existing output is kept unless --overwrite is given.
    again = runner.invoke(app, ["classify", str(data), "-q", str(q), "-o", str(out)])
    assert again.exit_code == 1 and "--overwrite" in again.output


def test_classify_jobs_option_gives_the_same_file(files):
    tmp, q, data = files
    for jobs in ("1", "2"):
        for ext in (".csv", ".sav"):
            result = runner.invoke(app, ["classify", str(data), "-q", str(q), "-o", str(tmp / f"j{jobs}{ext}"),
                                         "--jobs", jobs])
            assert result.exit_code == 0, result.output
    for ext in (".csv", ".sav"):  # the .sav header holds the data file's time, not the run's
        assert (tmp / f"j1{ext}").read_bytes() == (tmp / f"j2{ext}").read_bytes()
        assert (tmp / f"j1{ext}.faults.csv").read_bytes() == (tmp / f"j2{ext}.faults.csv").read_bytes()
    bad = runner.invoke(app, ["classify", str(data), "-q", str(q), "-o", str(tmp / "j0.csv"), "--jobs", "0"])
    assert bad.exit_code != 0 and not (tmp / "j0.csv").exists()


def test_classify_recoded_dta_read_by_pandas(files):
    tmp, q, data = files
    out = tmp / "coded.dta"
    result = runner.invoke(app, ["classify", str(data), "-q", str(q), "-o", str(out), "--form", "recoded"])
    assert result.exit_code == 0, result.output
    # pandas' own Stata reader (an independent implementation) sees the extended missing letters.
    back = pd.read_stata(out, convert_missing=True, convert_categoricals=False)
    cells = [v.string if hasattr(v, "string") else v for v in back["amount"]]
    # docs/contract.md §1: off_route 6 -> .e, refused (built-in reason 12, docs/statuses.md) -> .j, gate_unknown 4 -> .c
    assert cells == [5, ".e", ".j", ".c"]


def test_user_error_exits_1_without_traceback(files):
    tmp, q, _ = files
    result = runner.invoke(app, ["classify", str(tmp / "missing.csv"), "-q", str(q), "-o", str(tmp / "o.csv")])
    assert result.exit_code == 1
    assert "file not found" in result.output and "Traceback" not in result.output


def test_bad_usage_exits_2():
    assert runner.invoke(app, ["classify"]).exit_code == 2
    assert runner.invoke(app, ["no-such-command"]).exit_code == 2


def test_real_subprocess_smoke(files):
    tmp, q, data = files
    bad = tmp / "bad.yaml"
    bad.write_text("format: 1\nsurvey: {name: t, case_id: id}\nsections:\n  - name: s\n    items:\n"
                   "      - {name: x, type: integr}\n")
    proc = subprocess.run([sys.executable, "-m", "skipwise", "classify", str(data), "-q", str(bad), "-o",
                           str(tmp / "o.csv")], capture_output=True, text=True)
    assert proc.returncode == 1
    assert "bad.yaml:6" in proc.stderr and "integer" in proc.stderr and "Traceback" not in proc.stderr
    ok = subprocess.run([sys.executable, "-m", "skipwise", "--version"], capture_output=True, text=True)
    assert ok.returncode == 0 and ok.stdout.startswith("skipwise ")


@pytest.mark.parametrize("command,extra", [
    ("classify", []), ("report", []), ("diagnose", []),
], ids=["classify", "report", "diagnose"])
def test_output_never_replaces_an_input(files, command, extra):
    tmp, q, data = files
    before = data.read_bytes()
    target = data if command == "classify" else data.with_suffix(".xlsx")
    if command != "classify":
        target.write_bytes(b"not a workbook")  # pretend the input were this file
        data = target
    result = runner.invoke(app, [command, str(data), "-q", str(q), "-o", str(target), "--overwrite", *extra])
    assert result.exit_code == 1
    assert "would replace an input file" in result.output
    if command == "classify":
        assert data.read_bytes() == before


@pytest.mark.parametrize("suffix", [".zsav", ".xlsx"])
def test_classify_writes_zsav_and_xlsx(files, suffix):
    tmp, q, data = files
    out = tmp / f"out{suffix}"
    result = runner.invoke(app, ["classify", str(data), "-q", str(q), "-o", str(out)])
    assert result.exit_code == 0, result.output
    # Read back with the outside readers: pyreadstat for .zsav, pandas/openpyxl for .xlsx.
    if suffix == ".zsav":
        frame, _ = pyreadstat.read_sav(str(out))
    else:
        frame = pd.read_excel(out, engine="openpyxl")
    assert frame["amount_status"].tolist() == [1, 6, 12, 4]  # refused has the built-in number 12
    assert (tmp / f"out{suffix}.faults.csv").is_file()


def test_sav_and_dta_fault_listings_do_not_collide(files):
    tmp, q, data = files
    for name in ("x.sav", "x.dta"):
        assert runner.invoke(app, ["classify", str(data), "-q", str(q), "-o", str(tmp / name)]).exit_code == 0
    assert (tmp / "x.sav.faults.csv").is_file() and (tmp / "x.dta.faults.csv").is_file()


def test_form_is_a_choice_and_a_bad_one_exits_2_with_the_choices(files):
    tmp, q, data = files
    result = runner.invoke(app, ["classify", str(data), "-q", str(q), "-o", str(tmp / "c.csv"), "--form", "wide"])
    # click's usage-error exit status is 2 (docs/contract.md §4: bad command-line usage).
    assert result.exit_code == 2
    assert "'wide' is not one of" in result.output and "columns" in result.output and "recoded" in result.output
    assert not (tmp / "c.csv").exists()


@pytest.mark.parametrize("spelling", ["-o", "--out", "--output"])
def test_draft_and_diagnose_take_out_and_the_old_output_spelling(files, spelling):
    tmp, q, data = files
    result = runner.invoke(app, ["draft", str(data), spelling, str(tmp / "d.yaml")])
    assert result.exit_code == 0, result.output
    assert (tmp / "d.yaml").is_file()
    help_text = runner.invoke(app, ["draft", "--help"]).output
    assert "--out" in help_text and "--output" not in help_text  # the old spelling is hidden


def test_draft_without_out_is_a_usage_error(files):
    tmp, q, data = files
    result = runner.invoke(app, ["draft", str(data)])
    assert result.exit_code == 2 and "--out" in result.output


@pytest.mark.parametrize("target", ["c.xpt", "c.sas7bdat"])
def test_sas_output_is_refused_with_the_reason(files, target):
    tmp, q, data = files
    result = runner.invoke(app, ["classify", str(data), "-q", str(q), "-o", str(tmp / target)])
    assert result.exit_code == 1
    assert "cannot carry value labels or missing-value definitions" in result.output
    assert not (tmp / target).exists()


def test_writer_notes_come_once_per_file(tmp_path):
    from skipwise.io import MetadataWarning, SurveyMeta, write_survey
    import warnings

    frame = pd.DataFrame({f"v{i}": [1.0, -7.0, -8.0, -9.0, -6.0] for i in range(5)})
    meta = SurveyMeta(missing_values={c: [-6, -7, -8, -9] for c in frame.columns})
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        write_survey(frame, tmp_path / "n.sav", meta)
    notes = [w for w in caught if issubclass(w.category, MetadataWarning)]
    assert len(notes) == 1 and "v0" in str(notes[0].message) and "v4" in str(notes[0].message)
    # SPSS takes 3 discrete codes at most; pyreadstat reads back the covering range it wrote.
    _, back = pyreadstat.read_sav(str(tmp_path / "n.sav"), user_missing=True)
    assert back.missing_ranges["v0"] == [{"lo": -9.0, "hi": -6.0}]
