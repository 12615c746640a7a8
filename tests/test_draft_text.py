"""`draft` proposes a long variable label as the item's question text (``text:``).

The input .sav is written by pyreadstat itself (an outside writer); the draft is read back with
the project's loader, which must see the label's exact wording as ``text``.  The 60-character
cut is the project's choice (common practice, no source).
"""

from __future__ import annotations

import pandas as pd
import pyreadstat
from typer.testing import CliRunner

from skipwise.cli import app
from skipwise.questionnaire import load_questionnaire

LONG = "Thinking about the last twelve months, how often did you use the Oldmere library?"
SHORT = "Library visits"


def test_long_label_becomes_text(tmp_path):
    frame = pd.DataFrame({"id": [1.0, 2.0, 3.0], "visits": [1.0, 4.0, 2.0], "often": [1.0, 2.0, 1.0]})
    pyreadstat.write_sav(frame, str(tmp_path / "d.sav"), column_labels={"visits": SHORT, "often": LONG})
    out = tmp_path / "q.yaml"
    result = CliRunner().invoke(app, ["draft", str(tmp_path / "d.sav"), "-o", str(out)])
    assert result.exit_code == 0, result.output
    q = load_questionnaire(out)
    assert len(LONG) > 60 and len(SHORT) <= 60
    assert q.item("often").text == LONG and q.item("often").label == LONG
    assert q.item("visits").text is None and q.item("visits").label == SHORT
    assert "check it is the wording as asked" in out.read_text(encoding="utf-8")
