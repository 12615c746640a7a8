"""Status-coded exports are the same bytes in every process, whatever Python's string hashing.

Python randomises the hashing of strings per process (PYTHONHASHSEED), so the iteration order of a
set of reason names differs from run to run; the value labels written for the statuses must not
follow it.  Checked by writing the same file in child processes with different hash seeds.
"""

from __future__ import annotations

import os
import subprocess
import sys

import numpy as np
import pandas as pd
import pytest

QUESTIONNAIRE = """format: 1
survey: {name: t, case_id: id}
codes: [{value: -8, reason: dont_know, kind: nonresponse}, {value: -9, reason: refused, kind: nonresponse},
        {value: -7, reason: no_answer, kind: nonresponse}]
sections:
  - name: s
    items:
      - {name: a, type: integer, range: [0, 9]}
      - {name: b, type: integer, range: [0, 9], asked_if: 'a > 3'}
"""


@pytest.mark.parametrize("form, ext", [("columns", ".sav"), ("recoded", ".sav"), ("recoded", ".dta")])
def test_export_bytes_do_not_follow_string_hashing(tmp_path, form, ext):
    rng = np.random.default_rng(5)
    n = 60
    pd.DataFrame({"id": np.arange(n), "a": rng.choice([1.0, 5.0, -8.0, -9.0, -7.0], n),
                  "b": rng.choice([2.0, -8.0, -9.0, -7.0, np.nan], n)}).to_csv(tmp_path / "d.csv", index=False)
    (tmp_path / "q.yaml").write_text(QUESTIONNAIRE)
    outs = []
    for seed in ("1", "2", "3", "4"):
        out = tmp_path / f"o{seed}{ext}"
        env = {**os.environ, "PYTHONHASHSEED": seed}
        done = subprocess.run([sys.executable, "-m", "skipwise", "classify", str(tmp_path / "d.csv"), "-q",
                               str(tmp_path / "q.yaml"), "-o", str(out), "--form", form],
                              capture_output=True, text=True, env=env)
        assert done.returncode == 0, done.stderr
        outs.append(out.read_bytes())
    assert all(o == outs[0] for o in outs[1:])
