"""The publisher (skipwise.publish) and the command line's top-level handler.

Checked here, where a catalogue entry cannot express it: two runs on one package folder (one
gets the lock error naming the holder), a kill at each rename of the publish step (whatever
package is there verifies against its manifest file by file, or the previous one is restored at
the next start), SIGINT/SIGTERM (exit 130/143, one line, no staging left), and injected OS
errors (disk full, read-only folder; the tests run as root, whom chmod does not stop).

Outside references: the exit statuses 128 + signal number are the POSIX shell convention
(SIGINT = 2, SIGTERM = 15; POSIX.1-2017, Shell Command Language 2.8.2 "Exit Status for
Commands"); the SHA-256 of every file is recomputed with the standard library's hashlib, and
the errno values are the operating system's own (Python's errno module).
"""

from __future__ import annotations

import errno
import hashlib
import json
import os
import shutil
import signal
import socket
import subprocess
import sys
import time
from pathlib import Path

import pytest
from typer.testing import CliRunner

from skipwise.cli import app
from skipwise.publish import PackagePublisher, publish_files

HERE = Path(__file__).parent / "bad_inputs"
runner = CliRunner()


# -- helpers ----------------------------------------------------------------------------------
def _sha(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def verify(folder: Path) -> dict:
    """The package's files are exactly its manifest's outputs (plus manifest.json), byte for byte."""
    doc = json.loads((folder / "manifest.json").read_text(encoding="utf-8"))
    listed = {o["file"]: o["sha256"] for o in doc["outputs"]}
    assert sorted(p.name for p in folder.iterdir()) == sorted([*listed, "manifest.json"])
    for name, digest in listed.items():
        assert _sha(folder / name) == digest, name
    return doc


def leftovers(root: Path) -> list[str]:
    return sorted(p.name for p in root.rglob("*") if ".skipwise-" in p.name or ".part" in p.name
                  or p.name.endswith(".lock"))


@pytest.fixture(scope="module")
def built(tmp_path_factory) -> Path:
    """The good inputs and one package built from them (copied by each test)."""
    root = tmp_path_factory.mktemp("pkg")
    shutil.copytree(HERE, root / "in")
    result = runner.invoke(app, ["run", str(root / "in/run_good.yaml")])
    assert result.exit_code == 0, result.output
    verify(root / "out/package")
    return root


@pytest.fixture()
def project(built, tmp_path) -> Path:
    shutil.copytree(built, tmp_path, dirs_exist_ok=True)
    return tmp_path


_DRIVER = """
import os, signal, sys, time
from pathlib import Path
import skipwise.publish as P
import skipwise.pipeline.steps as S
mode, where, what = sys.argv[1], sys.argv[2], sys.argv[3]
if mode == "rename":            # act just before the publish step's rename `where`
    def hook(label):
        if label == where:
            os.kill(os.getpid(), getattr(signal, what))
    P._before_rename = hook
else:                           # act inside the classify step (the package is being built)
    real = S.classify_step
    def step(st, reporter):
        if what == "wait":      # say so, then wait to be signalled or released
            Path(where).write_text(str(os.getpid()))
            while not Path(where + ".go").exists():
                time.sleep(0.05)
        else:
            os.kill(os.getpid(), getattr(signal, what))
        return real(st, reporter)
    S.classify_step = step
from skipwise.cli import main
sys.argv = ["skipwise", *sys.argv[4:]]
main()
"""


def driver(root: Path, mode: str, where: str, what: str, *args: str) -> subprocess.Popen:
    return subprocess.Popen([sys.executable, "-c", _DRIVER, mode, where, what, *args], cwd=root,
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)


def skipwise(*args: str, cwd: Path) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "skipwise", *args], cwd=cwd, capture_output=True, text=True,
                          timeout=120)


def wait_for(path: Path, proc: subprocess.Popen, seconds: float = 60) -> None:
    end = time.monotonic() + seconds
    while not path.exists():
        assert proc.poll() is None, proc.communicate()
        assert time.monotonic() < end, "the run never reached its classify step"
        time.sleep(0.05)


# -- a kill at each rename of the publish step --------------------------------------------------
@pytest.mark.parametrize("rename, expect", [("aside", "old"), ("in", "old"), ("remove", "new")],
                         ids=["before-old-aside", "between-renames", "before-old-removed"])
def test_kill_during_publish_leaves_a_whole_package(project, rename, expect):
    package = project / "out/package"
    old = _sha(package / "manifest.json")
    inputs = {p.name: _sha(p) for p in (project / "in").iterdir() if p.is_file()}
    proc = driver(project, "rename", rename, "SIGKILL", "run", str(project / "in/run_good.yaml"), "--overwrite")
    proc.communicate(timeout=120)
    assert proc.returncode == -signal.SIGKILL
    # Whatever is there now is one whole package, or the previous one waits to be restored.
    if rename == "in":
        assert not package.exists()
        assert (project / "out/.package.skipwise-previous").is_dir()
    else:
        verify(package)
    # The next start repairs: the previous package restored, or the superseded one removed, and
    # the dead run's staging folder removed; each is reported.
    with PackagePublisher(package) as pub:
        notes = " ".join(pub.notes)
    verify(package)
    assert (_sha(package / "manifest.json") == old) == (expect == "old")
    assert ("restored the previous package" in notes) == (rename == "in")
    assert ("staging folder of an earlier run" in notes) == (rename != "remove")
    assert leftovers(project / "out") == []
    assert {p.name: _sha(p) for p in (project / "in").iterdir() if p.is_file()} == inputs


def test_a_failed_rename_puts_the_old_package_back(project, monkeypatch):
    package = project / "out/package"
    old = _sha(package / "manifest.json")
    import skipwise.publish as P

    real = os.replace

    def failing(src, dst):  # the second rename (staging -> package) fails
        if Path(dst) == package and ".skipwise-staging-" in str(src):
            raise OSError(errno.EIO, os.strerror(errno.EIO), str(src))
        return real(src, dst)

    monkeypatch.setattr(P.os, "replace", failing)
    result = runner.invoke(app, ["run", str(project / "in/run_good.yaml"), "--overwrite"])
    assert result.exit_code == 1 and "Traceback" not in result.output
    assert "input/output error" in result.output and ".skipwise-staging-" not in result.output
    verify(package)
    assert _sha(package / "manifest.json") == old
    assert leftovers(project / "out") == []


# -- SIGINT and SIGTERM ---------------------------------------------------------------------------
@pytest.mark.parametrize("sig, code", [("SIGINT", 130), ("SIGTERM", 143)])
def test_signal_while_building_changes_nothing(project, sig, code):
    package = project / "out/package"
    before = {p.name: _sha(p) for p in package.iterdir()}
    marker = project / "classifying"
    proc = driver(project, "step", str(marker), "wait", "run", str(project / "in/run_good.yaml"), "--overwrite")
    wait_for(marker, proc)
    assert [p for p in (project / "out").iterdir() if ".skipwise-staging-" in p.name]  # being built
    proc.send_signal(getattr(signal, sig))
    out, err = proc.communicate(timeout=60)
    assert proc.returncode == code, (out, err)  # 128 + 2 / 128 + 15, the POSIX convention
    assert err.strip().splitlines() == ["interrupted: nothing was changed"], err
    assert "Traceback" not in out + err
    assert {p.name: _sha(p) for p in package.iterdir()} == before
    assert leftovers(project / "out") == []


def test_signal_during_the_swap_is_held_until_the_package_is_whole(project):
    package = project / "out/package"
    old = _sha(package / "manifest.json")
    proc = driver(project, "rename", "in", "SIGTERM", "run", str(project / "in/run_good.yaml"), "--overwrite")
    out, err = proc.communicate(timeout=120)
    assert proc.returncode == 143, (out, err)
    assert err.strip().splitlines()[-1] == "interrupted: the output had already been published completely"
    verify(package)
    assert _sha(package / "manifest.json") != old
    assert leftovers(project / "out") == []


# -- two runs on one folder -----------------------------------------------------------------------
@pytest.mark.parametrize("overwrite", [False, True], ids=["fresh-folder", "both-overwrite"])
def test_second_run_on_the_same_folder_is_refused_naming_the_holder(built, tmp_path, overwrite):
    shutil.copytree(built / "in", tmp_path / "in")  # a fresh output folder: no package yet
    flag = ["--overwrite"] if overwrite else []
    marker = tmp_path / "classifying"
    first = driver(tmp_path, "step", str(marker), "wait", "run", str(tmp_path / "in/run_good.yaml"), *flag)
    wait_for(marker, first)
    second = skipwise("run", str(tmp_path / "in/run_good.yaml"), *flag, cwd=tmp_path)
    Path(str(marker) + ".go").write_text("")
    out, err = first.communicate(timeout=120)
    assert first.returncode == 0, (out, err)
    assert second.returncode == 1, second.stdout + second.stderr
    text = second.stderr
    assert f"another skipwise run is writing this package: process {first.pid} on host {socket.gethostname()}" in text
    assert "Traceback" not in second.stdout + text
    verify(tmp_path / "out/package")
    assert leftovers(tmp_path / "out") == []
    # and once the first is done, a run without --overwrite refuses the existing package
    third = runner.invoke(app, ["run", str(tmp_path / "in/run_good.yaml")])
    assert third.exit_code == 1 and "--overwrite" in third.output


def test_folder_that_is_not_a_package_is_never_replaced(project):
    package = project / "out/package"
    (package / "my_notes.txt").write_text("mine")
    before = {p.name: _sha(p) for p in package.iterdir()}
    result = runner.invoke(app, ["run", str(project / "in/run_good.yaml"), "--overwrite"])
    assert result.exit_code == 1
    assert "holds files its manifest.json does not list (my_notes.txt)" in result.output
    assert {p.name: _sha(p) for p in package.iterdir()} == before
    assert leftovers(project / "out") == []


# -- injected OS errors ---------------------------------------------------------------------------
def test_disk_full_while_writing_names_the_output_not_the_temporary_file(tmp_path, monkeypatch):
    from skipwise.io import writers

    def full(df, meta, path, fmt):
        def job(tmp):
            Path(tmp).write_text("id\n")
            raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))  # as write(2) reports it: no file name
        return job

    monkeypatch.setitem(writers._PREPARE, "csv", full)
    out = tmp_path / "c.csv"
    result = runner.invoke(app, ["classify", str(HERE / "good_data.csv"), "-q", str(HERE / "good_q.yaml"),
                                 "-o", str(out)])
    assert result.exit_code == 1 and "Traceback" not in result.output
    assert f"error: {out}: cannot write the output: the disk is full" in result.output
    assert ".part" not in result.output
    assert list(tmp_path.iterdir()) == []


def test_disk_full_on_an_spss_file_is_not_blamed_on_the_columns(tmp_path, monkeypatch):
    import pyreadstat

    from skipwise.io import writers

    def failing(*args, **kwargs):
        raise pyreadstat.ReadstatError("Unable to write")

    monkeypatch.setattr(pyreadstat, "write_sav", failing)
    monkeypatch.setattr(writers, "_free_bytes", lambda folder: 0)
    out = tmp_path / "c.sav"
    result = runner.invoke(app, ["classify", str(HERE / "good_data.csv"), "-q", str(HERE / "good_q.yaml"),
                                 "-o", str(out)])
    assert result.exit_code == 1, result.output
    assert "the disk is full" in result.output and "column types" not in result.output
    assert list(tmp_path.iterdir()) == []


def test_read_only_folder_is_refused_before_any_work(tmp_path, monkeypatch):
    import skipwise.publish as P

    def read_only(*args, dir=None, **kwargs):
        raise OSError(errno.EROFS, os.strerror(errno.EROFS), str(Path(dir) / ".x"))

    monkeypatch.setattr(P.tempfile, "mkstemp", read_only)
    for args in (["report", str(HERE / "good_data.csv"), "-q", str(HERE / "good_q.yaml"), "-o", str(tmp_path / "r.xlsx")],
                 ["draft", str(HERE / "good_data.csv"), "-o", str(tmp_path / "d.yaml")]):
        result = runner.invoke(app, args)
        assert result.exit_code == 1 and "Traceback" not in result.output, result.output
        assert "read-only file system" in result.output and args[-1] in result.output
    assert list(tmp_path.iterdir()) == []


def test_out_of_memory_while_reading_is_one_message(monkeypatch):
    import skipwise.io as sio

    def huge(*args, **kwargs):
        raise MemoryError()

    monkeypatch.setattr(sio, "read_survey", huge)
    result = runner.invoke(app, ["check", str(HERE / "good_data.csv"), "-q", str(HERE / "good_q.yaml")])
    assert result.exit_code == 1 and "Traceback" not in result.output
    assert result.output.startswith(f"error: {HERE / 'good_data.csv'}: out of memory while running 'skipwise check'")


def test_files_of_one_command_appear_together_or_not_at_all(tmp_path, monkeypatch):
    import skipwise.publish as P

    a, b = tmp_path / "a.csv", tmp_path / "b.csv"
    a.write_text("old a")
    b.write_text("old b")
    real = os.replace
    calls = []

    def second_fails(src, dst):  # the new b cannot be renamed in (once)
        calls.append(dst)
        if Path(dst) == b and ".part" in str(src) and len(calls) < 5:
            raise OSError(errno.EIO, os.strerror(errno.EIO), str(src))
        return real(src, dst)

    monkeypatch.setattr(P.os, "replace", second_fails)
    with pytest.raises(Exception, match="input/output error"):
        with publish_files([a, b]) as (ta, tb):
            ta.write_text("new a")
            tb.write_text("new b")
    assert a.read_text() == "old a" and b.read_text() == "old b"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a.csv", "b.csv"]


# -- smaller: what messages say -------------------------------------------------------------------
def test_damaged_workbook_message_is_short_and_printable(tmp_path):
    import zipfile

    bad = tmp_path / "d.xlsx"
    with zipfile.ZipFile(bad, "w") as z:  # workbook parts full of binary noise
        z.writestr("[Content_Types].xml", bytes(range(256)) * 50)
        z.writestr("xl/workbook.xml", bytes(range(256)) * 50)
    result = runner.invoke(app, ["check", str(bad), "-q", str(HERE / "good_q.yaml")])
    assert result.exit_code == 1 and "not a readable Excel workbook" in result.output
    assert len(result.output) < 600 and "\\x" not in result.output
    assert all(ch.isprintable() for ch in result.output.replace("\n", ""))


def test_formula_without_a_computed_value_gives_a_note(tmp_path):
    import openpyxl

    wb = openpyxl.Workbook()  # openpyxl stores formulas without computing them: no cached value
    ws = wb.active
    ws.append(["id", "age"])
    ws.append([1, 30])
    ws.append([2, "=B2+1"])
    wb.save(tmp_path / "d.xlsx")
    q = tmp_path / "q.yaml"
    q.write_text("format: 1\nsurvey: {name: t, case_id: id}\nsections:\n  - name: main\n    items:\n"
                 "      - {name: age, type: integer, range: [0, 120]}\n")
    result = runner.invoke(app, ["check", str(tmp_path / "d.xlsx"), "-q", str(q)])
    assert "note:" in result.output and "1 formula cell(s) hold no computed value (B3" in result.output


def test_nul_in_text_is_refused_for_spss_naming_the_column(tmp_path):
    import pandas as pd

    pd.DataFrame({"id": [1, 2, 3], "town": ["Orrin", "Lowe\x00sby", "Marrow"]}).to_parquet(tmp_path / "d.parquet")
    q = tmp_path / "q.yaml"
    q.write_text("format: 1\nsurvey: {name: t, case_id: id}\nsections:\n  - name: main\n    items:\n"
                 "      - {name: town, type: text}\n")
    out = tmp_path / "c.sav"
    result = runner.invoke(app, ["classify", str(tmp_path / "d.parquet"), "-q", str(q), "-o", str(out)])
    assert result.exit_code == 1, result.output
    assert f"{out}, item 'town': text holds a NUL character in 1 row(s) (data row 2)" in result.output
    assert ".part" not in result.output and not out.exists()
    # Parquet holds the character as it is (pandas reads it back unchanged)
    ok = runner.invoke(app, ["classify", str(tmp_path / "d.parquet"), "-q", str(q), "-o", str(tmp_path / "c.parquet")])
    assert ok.exit_code == 0, ok.output
    assert pd.read_parquet(tmp_path / "c.parquet")["town"].tolist()[1] == "Lowe\x00sby"


def test_weighting_workbook_is_resolved_against_the_plan_folder(tmp_path):
    from skipwise.weighting.plan import load_plan

    plans = tmp_path / "plans"
    plans.mkdir()
    text = (HERE / "good_weights.yaml").read_text() + "output: {workbook: books/w.xlsx}\n"
    (plans / "w.yaml").write_text(text)
    assert load_plan(plans / "w.yaml").workbook == str(plans / "books/w.xlsx")
