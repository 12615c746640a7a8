"""The bad-input catalogue (tests/bad_inputs/catalogue.yaml), run through the command line.

Every case must end the way docs/contract.md §4 fixes for a user error: exit status 1 and
one readable message without a traceback, here also holding the catalogue's fragment and
exactly its problem codes; no output file (nor a leftover temporary ``.part`` file) is
written and no input file changes.  A small happy path then checks that no successful
command modifies its inputs and that an existing output is replaced only with --overwrite
(README, "File formats").  The expected messages are the project's own wording: the
outside rule checked is the exit-status and no-partial-output contract of docs/contract.md §4.
"""

from __future__ import annotations

import hashlib
import shutil
import sys
from collections import Counter
from pathlib import Path

import pandas as pd
import pyreadstat
import pytest
import yaml
from typer.testing import CliRunner

import skipwise.cli as cli_package
from skipwise.cli import app
from skipwise.errors import ProblemCode

HERE = Path(__file__).parent / "bad_inputs"
CATALOGUE = yaml.safe_load((HERE / "catalogue.yaml").read_text(encoding="utf-8"))["cases"]
# The command modules, and the app module whose top-level handler reports OS and memory errors.
# (the package's attribute ``app`` is the Typer application, so the module comes from sys.modules)
CMD_MODULES = [getattr(cli_package, name) for name in dir(cli_package) if name.startswith("cmd_")] + [
    sys.modules["skipwise.cli.app"]]
runner = CliRunner()


# -- helpers ----------------------------------------------------------------------------------
def digests(folder: Path) -> dict[str, str]:
    return {str(p.relative_to(folder)): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(folder.rglob("*")) if p.is_file()}


def _good_sav(path: Path) -> Path:
    # Written by pyreadstat itself (not by skipwise), so the truncation is of a genuine file.
    frame = pd.read_csv(HERE / "good_data.csv")
    frame["region"] = frame["region"].astype(str)
    pyreadstat.write_sav(frame, str(path), compress=path.suffix == ".zsav",
                         column_labels={"age": "Age in years"})
    return path


def _truncate(full: Path, cut: Path) -> None:
    data = full.read_bytes()
    cut.write_bytes(data[: len(data) // 2])
    full.unlink()


def make_inputs(case: dict, inputs: Path, out: Path) -> None:
    for what in case.get("make", []):
        if what == "truncated_sav":
            _truncate(_good_sav(inputs / "full.sav"), inputs / "d_truncated.sav")
        elif what == "truncated_zsav":
            _truncate(_good_sav(inputs / "full.zsav"), inputs / "d_truncated.zsav")
        elif what == "existing_out":
            (out / "exists.csv").write_text("id\n1\n")
        elif what == "dir_out":  # a folder where the output file should go
            (out / "d.csv").mkdir()
        elif what == "foreign_package":  # a user's file in the run's package folder
            (out / "package").mkdir()
            (out / "package" / "notes.txt").write_text("not skipwise's\n")
        elif what == "utf16_csv":
            (inputs / "d_utf16.csv").write_bytes((HERE / "good_data.csv").read_text().encode("utf-16"))
        elif what == "damaged_xlsx":  # a zip holding a workbook part that is not XML
            import zipfile

            with zipfile.ZipFile(inputs / "d_damaged.xlsx", "w") as z:
                z.writestr("[Content_Types].xml", bytes(range(256)) * 50)
                z.writestr("xl/workbook.xml", bytes(range(256)) * 50)
        else:
            raise AssertionError(f"unknown make entry {what!r}")


def fill(args: list, inputs: Path, out: Path) -> list[str]:
    return [str(a).replace("{in}", str(inputs)).replace("{out}", str(out)) for a in args]


@pytest.fixture()
def recorded(monkeypatch):
    """Record the problem codes of every error a command reports (and of `check`'s findings)."""
    seen: list[list[ProblemCode]] = []
    for module in CMD_MODULES:
        original = getattr(module, "fail", None)
        if original is None:
            continue

        def spy(err, _original=original):
            seen.append(list(err.codes))
            _original(err)

        monkeypatch.setattr(module, "fail", spy)
    from skipwise.cli import cmd_check

    real_check = cmd_check.check_data

    def check_spy(*args, **kwargs):
        result = real_check(*args, **kwargs)
        if result.errors:
            seen.append([p.code for p in result.errors])
        return result

    monkeypatch.setattr(cmd_check, "check_data", check_spy)
    return seen


def run_case(case: dict, tmp_path: Path, recorded: list) -> tuple:
    inputs, out = tmp_path / "in", tmp_path / "out"
    shutil.copytree(HERE, inputs)
    out.mkdir()
    make_inputs(case, inputs, out)
    before_in, before_out = digests(inputs), digests(out)
    result = runner.invoke(app, fill(case["run"], inputs, out))
    return result, before_in, digests(inputs), before_out, digests(out), out


# -- the catalogue ----------------------------------------------------------------------------
def test_catalogue_is_well_formed():
    ids = [c["id"] for c in CATALOGUE]
    assert len(ids) == len(set(ids)), "duplicate case ids in the catalogue"
    assert len(ids) >= 40
    known = {c.value for c in ProblemCode}
    for case in CATALOGUE:
        assert set(case) <= {"id", "run", "codes", "message", "make", "exit"}, case["id"]
        # exit 2: bad command-line usage, refused by the option parser before any skipwise code runs.
        assert case.get("exit", 1) in (1, 2), case["id"]
        assert (case["codes"] or case.get("exit") == 2) and set(case["codes"]) <= known, case["id"]
        assert case["message"].strip(), case["id"]
    # Every committed bad file is used by some case (no dead inputs).
    named = " ".join(" ".join(map(str, args)) for args in [c["run"] for c in CATALOGUE] + HAPPY)
    unused = [p.name for p in HERE.iterdir() if p.name != "catalogue.yaml" and p.name not in named]
    assert unused == []


@pytest.mark.parametrize("case", CATALOGUE, ids=[c["id"] for c in CATALOGUE])
def test_bad_input(case, tmp_path, recorded):
    result, in_before, in_after, out_before, out_after, out = run_case(case, tmp_path, recorded)
    text = result.output
    if case.get("exit") == 2:  # a usage error (docs/contract.md §4): click's message, nothing written or recorded
        assert result.exit_code == 2, f"exit {result.exit_code}: {text}\n{result.exception!r}"
        assert case["message"] in text and "Traceback" not in text and recorded == []
        assert out_after == out_before and in_after == in_before
        return
    assert result.exit_code == 1, f"exit {result.exit_code}: {text}\n{result.exception!r}"
    # A user error: the command caught a SkipwiseError (or check found errors), nothing escaped.
    assert result.exception is None or isinstance(result.exception, SystemExit), repr(result.exception)
    assert "Traceback" not in text
    assert case["message"] in text, text
    # ONE message: check's findings table, or one "error:" paragraph (headline + problem lines)
    # at the end; only `run` shows its steps' progress lines before it.
    if case["run"][0] != "check" or text.startswith("error:"):
        lines = text.rstrip("\n").splitlines()
        starts = [i for i, ln in enumerate(lines) if ln.startswith("error:")]
        assert len(starts) == 1, text
        assert starts[0] == 0 or case["run"][0] == "run", text
        assert all(line.startswith("  ") for line in lines[starts[0] + 1:]), text
    assert len(recorded) == 1, recorded
    assert Counter(c.value for c in recorded[0]) == Counter(case["codes"]), text
    # Nothing written, no temporary leftovers, inputs untouched.
    assert out_after == out_before, sorted(set(out_after) - set(out_before))
    assert not [p for p in out.parent.rglob("*") if ".part" in p.name]
    assert in_after == in_before


# -- safety on a small happy path -------------------------------------------------------------
HAPPY = [
    ["check", "{in}/good_data.csv", "-q", "{in}/good_q.yaml"],
    ["classify", "{in}/good_data.csv", "-q", "{in}/good_q.yaml", "-o", "{out}/classified.csv"],
    ["classify", "{in}/full.sav", "-q", "{in}/good_q.yaml", "-o", "{out}/recoded.sav", "--form", "recoded"],
    ["report", "{in}/good_data.csv", "-q", "{in}/good_q.yaml", "-o", "{out}/report.xlsx", "--weight", "base_wt"],
    ["weigh", "{in}/good_data.csv", "--plan", "{in}/good_weights.yaml", "-o", "{out}/weighted.csv"],
    ["impute", "{in}/good_data.csv", "-q", "{in}/good_q.yaml", "--plan", "{in}/good_impute.yaml",
     "-o", "{out}/imputed.csv"],
    ["draft", "{in}/full.sav", "-o", "{out}/draft.yaml"],
    ["run", "{in}/run_good.yaml"],  # writes {out}/package (the plan's folder is {in})
]


def test_successful_commands_leave_inputs_alone_and_need_overwrite(tmp_path):
    inputs, out = tmp_path / "in", tmp_path / "out"
    shutil.copytree(HERE, inputs)
    _good_sav(inputs / "full.sav")
    out.mkdir()
    for args in HAPPY:
        before = digests(inputs)
        made_before = digests(out)
        result = runner.invoke(app, fill(args, inputs, out))
        assert result.exit_code == 0, (args[0], result.output, result.exception)
        assert digests(inputs) == before, f"{args[0]} modified an input"
        made = set(digests(out)) - set(made_before)
        # check writes nothing; every other command writes something
        assert bool(made) == (args[0] != "check"), f"{args[0]} wrote {sorted(made)}"
        assert not [p for p in out.iterdir() if ".part" in p.name]
        if args[0] == "check":
            continue
        # Again without --overwrite: refused, every existing output byte for byte unchanged.
        written = digests(out)
        again = runner.invoke(app, fill(args, inputs, out))
        assert again.exit_code == 1 and "--overwrite" in again.output, again.output
        assert digests(out) == written
        # With --overwrite: accepted, and the outputs are rewritten in place.
        forced = runner.invoke(app, fill(args, inputs, out) + ["--overwrite"])
        assert forced.exit_code == 0, forced.output
        assert set(digests(out)) == set(written)
        assert digests(inputs) == before
