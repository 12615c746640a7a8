"""One number per item across the package: the rates read back from every output of one `skipwise run`.

A small demo package (invented scenario, 700 addresses) is built with `skipwise run`; the item rates
are read back from item_report.xlsx, diagnostics.xlsx, codebook.md, codebook.html and codebook.xml
and compared with rates recomputed independently with pandas from the `<item>_status` columns of
the delivered .sav (read with pyreadstat, status numbers decoded from its own value labels). The
universe of an `invalid` cell is not in its status; it comes from the demo's routing written out by
hand in `skipwise.demo.items` (independent of the project's rule parser and classifier).
weighting.xlsx shows no item rates (outcome rates and weights only), so it has nothing to compare.
"""

from __future__ import annotations

import re
import xml.etree.ElementTree as ET
from html.parser import HTMLParser

import numpy as np
import pandas as pd
import pyreadstat
import pytest
from typer.testing import CliRunner

from skipwise.cli import app
from skipwise.demo import generate
from skipwise.demo.items import ABSENT, ITEMS, KNOWN, T, UNKNOWN, Record
from skipwise.demo.plan import write_demo_plans

runner = CliRunner()
#: The codebooks describe an item under its first column (a check-all set under its first option).
FIRST = {it.name: it.columns[0] for it in ITEMS}


def _pct(x: float) -> str:
    """The shown precision of every rate in the package: percent with one decimal."""
    return "" if not np.isfinite(x) else f"{100 * x:.1f}%"


@pytest.fixture(scope="module")
def package(tmp_path_factory):
    out = tmp_path_factory.mktemp("onerate")
    scenario = generate(seed=7, n_addresses=700)
    scenario.write(out / "data")
    plan = write_demo_plans(scenario, out)
    text = plan.read_text().replace("imputation:\n  plan: imputation_plan.yaml\n", "")  # not needed here
    plan.write_text(text, encoding="utf-8")
    res = runner.invoke(app, ["run", str(plan)])
    assert res.exit_code == 0, res.output
    return out / "package"


@pytest.fixture(scope="module")
def reference(package):
    """Rates recomputed with pandas from the delivered file (the outside reference)."""
    df, meta = pyreadstat.read_sav(str(package / "marrowby-2026.sav"), user_missing=True)
    names = [it.name for it in ITEMS]
    token = {}
    # status numbers -> tokens by the table of docs/statuses.md (the labels are words for people)
    from skipwise.classify.statuses import STATUS_NUMBERS
    from skipwise.questionnaire import load_questionnaire

    q = load_questionnaire(package.parent / "marrowby-2026.yaml")
    by_number = {n: s for s, n in {**STATUS_NUMBERS, **q.reason_numbers}.items()}
    for it in names:
        token[it] = df[f"{it}_status"].map(by_number)
    status = pd.DataFrame(token)
    # Universe of every cell from the demo's hand-written routing over the delivered statuses and values.
    rec = Record(len(df))
    universe = {}
    for item in ITEMS:
        universe[item.name] = item.rule(rec) if item.rule else np.full(len(df), T, dtype=np.int8)
        st = status[item.name].to_numpy()
        state = np.where(st == "answered", KNOWN, np.where(np.isin(st, ["skipped", "off_route", "left_blank"]),
                                                          ABSENT, UNKNOWN)).astype(np.int8)
        for c in (item.name, *item.columns):
            col = (pd.to_numeric(df[c], errors="coerce").to_numpy(dtype=float, na_value=np.nan)
                   if c in df.columns else np.full(len(df), np.nan))  # text items: no rule reads them as numbers
            rec.value[c] = np.where(st == "answered", col, np.nan)
            rec.state[c] = state
            rec.has_answer[c] = st == "answered"
    w = pd.to_numeric(df["wt_final"], errors="coerce").fillna(0.0)
    reasons = sorted({t for col in status for t in status[col].dropna().unique()} - {
        "answered", "skipped", "item_missing", "gate_unknown", "breakoff", "off_route", "wrong_code", "invalid",
        "left_blank"})
    rows = {}
    for it in names:
        s = status[it]
        nonresp = s.isin([*reasons, "item_missing"])
        faults = (s == "wrong_code") | ((s == "invalid") & (universe[it] == T))
        in_d = (s == "answered") | nonresp | faults
        n_d, w_d = int(in_d.sum()), float(w[in_d].sum())
        rows[it] = {
            "D": n_d, "answered": (s == "answered").sum() / n_d if n_d else np.nan,
            "nonresponse": nonresp.sum() / n_d if n_d else np.nan, "faults": faults.sum() / n_d if n_d else np.nan,
            "item_missing": (s == "item_missing").sum() / n_d if n_d else np.nan,
            "w_nonresponse": w[nonresp].sum() / w_d if w_d else np.nan,
            "w_answered": w[s == "answered"].sum() / w_d if w_d else np.nan,
            "w_faults": w[faults].sum() / w_d if w_d else np.nan,
            "w_item_missing": w[s == "item_missing"].sum() / w_d if w_d else np.nan,
        }
    ref = pd.DataFrame(rows).T
    # the check can fail: some items carry faults, some in-universe invalid values exist
    assert (ref["faults"] > 0).any() and (ref["D"] > 0).mean() > 0.8
    inv = pd.DataFrame({it: (status[it] == "invalid") for it in names})
    inside = pd.DataFrame({it: universe[it] == T for it in names}, index=inv.index)
    assert (inv & inside).to_numpy().any() and (inv & ~inside).to_numpy().any()  # both kinds are checked
    return ref


def _sheet(ws, header_row: int) -> pd.DataFrame:
    rows = list(ws.iter_rows(min_row=header_row, values_only=True))
    return pd.DataFrame(rows[1:], columns=rows[0])


def test_item_report_equals_the_reference(package, reference):
    from sheetread import table
    from skipwise.report.sheets_items import column_header

    items = table(package / "item_report.xlsx", "Items", "Section").set_index("Item")
    items.columns = [{column_header(k): k for k in (
        "item_missing rate", "item_missing rate (weighted)")}.get(c, c) for c in items.columns]
    items = items.loc[reference.index]
    assert (items["D: in universe, excl. breakoff and left_blank"].astype(int) == reference["D"].astype(int)).all()
    pairs = [("Item nonresponse rate", "nonresponse"), ("Answered rate", "answered"), ("Fault rate", "faults"),
             ("item_missing rate", "item_missing"), ("Item nonresponse rate (weighted)", "w_nonresponse"),
             ("Answered rate (weighted)", "w_answered"), ("Fault rate (weighted)", "w_faults"),
             ("item_missing rate (weighted)", "w_item_missing")]
    for shown, ref in pairs:
        got = items[shown].astype(float).map(_pct)
        assert (got == reference[ref].map(_pct)).all(), (shown, got[got != reference[ref].map(_pct)])


def test_diagnostics_show_the_package_rate_beside_their_own_base(package, reference):
    from sheetread import table

    glance = table(package / "diagnostics.xlsx", "Items at a glance", "Item")
    glance = glance[glance["Item"].isin(reference.index)].set_index("Item")
    assert len(glance) >= 10
    got = glance["Package rate"].astype(float).map(_pct)
    assert (got == reference.loc[glance.index, "nonresponse"].map(_pct)).all()
    assert (glance["Package D"].astype(int) == reference.loc[glance.index, "D"].astype(int)).all()
    assert (glance["In scope"] <= glance["Package D"]).all()  # the model's own base is a part of D


def _md_rates(md: str, item: str) -> list[str]:
    part = md[md.index(f"### `{item}`"):]
    part = part[:part.index("\n### ", 5)] if "\n### " in part[5:] else part
    line = next(ln for ln in part.splitlines() if ln.startswith("| item nonresponse rate |"))
    return [c.strip() for c in line.strip("|").split("|")][1:]


class _Cells(HTMLParser):
    def __init__(self):
        super().__init__()
        self.rows: list[list[str]] = []
        self.anchor = ""
        self._cell = None

    def handle_starttag(self, tag, attrs):
        if tag == "tr":
            self.rows.append([self.anchor])
        if tag in ("td", "th"):
            self._cell = ""
        if dict(attrs).get("id"):
            self.anchor = dict(attrs)["id"]

    def handle_endtag(self, tag):
        if tag in ("td", "th") and self._cell is not None:
            self.rows[-1].append(self._cell.strip())
            self._cell = None

    def handle_data(self, data):
        if self._cell is not None:
            self._cell += data


def test_codebooks_equal_the_reference(package, reference):
    md = (package / "codebook.md").read_text(encoding="utf-8")
    parser = _Cells()
    parser.feed((package / "codebook.html").read_text(encoding="utf-8"))
    html_rates = {}
    for row in parser.rows:
        if len(row) >= 3 and row[1] == "item nonresponse rate":
            html_rates.setdefault(row[0], row[2:])
    assert len(html_rates) >= len(reference) // 2
    for item, r in reference.iterrows():
        shown = _md_rates(md, FIRST[item])
        assert shown == [_pct(r["nonresponse"]), _pct(r["w_nonresponse"])], item
    matched = 0
    for anchor, cells in html_rates.items():
        item = next((i for i in reference.index if re.search(rf"(^|[^a-z0-9_]){re.escape(FIRST[i])}$", anchor)),
                    None)
        if item is not None:
            assert cells == [_pct(reference.loc[item, "nonresponse"]), _pct(reference.loc[item, "w_nonresponse"])]
            matched += 1
    assert matched >= len(reference) // 2


def test_ddi_codebook_equals_the_reference(package, reference):
    tree = ET.parse(package / "codebook.xml")
    ns = {"d": tree.getroot().tag.split("}")[0].strip("{")}
    seen = 0
    owner = {col: item for item, col in FIRST.items()}
    for var in tree.getroot().iter(f"{{{ns['d']}}}var"):
        name = owner.get(var.get("name"))
        if name not in reference.index:
            continue
        stats = {(s.get("otherType"), s.get("wgtd")): float(s.text) for s in var.findall("d:sumStat", ns)
                 if s.get("type") == "other"}
        if ("item-nonresponse-rate", None) not in stats:
            continue
        assert _pct(stats[("item-nonresponse-rate", None)]) == _pct(reference.loc[name, "nonresponse"]), name
        assert int(stats[("items-in-universe-D", None)]) == reference.loc[name, "D"], name
        if ("item-nonresponse-rate", "wgtd") in stats:
            assert _pct(stats[("item-nonresponse-rate", "wgtd")]) == _pct(reference.loc[name, "w_nonresponse"])
        seen += 1
    assert seen >= len(reference) // 2
