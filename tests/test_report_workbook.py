"""The item-nonresponse workbook: counts, rates, patterns, structure and privacy."""

from __future__ import annotations

import shutil
import subprocess
import zipfile

import numpy as np
import openpyxl

from skipwise.report.sheets_items import column_header as H
from skipwise.sheetstyle import MARK
from sheetread import texts
import pandas as pd
import pytest
from numpy.testing import assert_allclose

from skipwise.classify import classify
from skipwise.errors import ProblemCode, SkipwiseError
from skipwise.questionnaire.loader import loads_questionnaire
from skipwise.report import SHEETS, write_item_report

QTEXT = """
format: 1
survey: {name: tiny-test, title: Tiny Test Survey, case_id: rid}
context: [wt, region]
codes:
  - {value: -1, reason: routed_out, kind: structural}
  - {value: -8, reason: dont_know, kind: nonresponse}
  - {value: -9, reason: refused, kind: nonresponse}
breakoff: {min_run: 3}
sections:
  - name: main
    items:
      - {name: a, label: Gate question, type: categorical, values: {1: "Yes", 2: "No"}}
      - {name: b, label: Follow-up, type: integer, range: [0, 10], asked_if: a == 1}
      - {name: c, label: Everyone, type: integer, range: [0, 10]}
      - {name: d, type: integer, range: [0, 10]}
      - {name: e, type: integer, range: [0, 10]}
      - {name: f, label: Free text, type: text, asked_if: a == 1}
"""

IDS = ["ZQ-7001", "ZQ-7002", "ZQ-7003", "ZQ-7004", "ZQ-7005", "ZQ-7006"]

# Statuses stated by hand from docs/contract.md §1 (rows: cases ZQ-7001..7006; columns a..f).
HAND = [
    ["answered", "answered", "answered", "answered", "answered", "answered"],
    ["answered", "refused", "item_missing", "answered", "answered", "answered"],
    ["answered", "off_route", "dont_know", "answered", "item_missing", "off_route"],
    ["dont_know", "gate_unknown", "answered", "answered", "answered", "gate_unknown"],
    ["answered", "breakoff", "breakoff", "breakoff", "breakoff", "breakoff"],
    ["answered", "skipped", "answered", "invalid", "answered", "skipped"],
]
ITEMS = ["a", "b", "c", "d", "e", "f"]


@pytest.fixture
def tiny() -> tuple[pd.DataFrame, object]:
    q = loads_questionnaire(QTEXT)
    df = pd.DataFrame({
        "rid": IDS,
        "wt": [1.0, 2.0, 3.0, 1.5, 0.5, 1.0],
        "region": ["N", "S", "N", None, "S", "N"],
        "a": [1, 1, 2, -8, 1, 2],
        "b": [3, -9, 5, np.nan, np.nan, -1],
        "c": [1, np.nan, -8, 2, np.nan, 4],
        "d": [1, 2, 3, 4, np.nan, 99],
        "e": [1, 2, np.nan, 4, np.nan, 5],
        "f": ["ok", "fine", "=2+3", None, None, None],
    })
    return df, q


def _sheet_table(ws, first_header: str, nth: int = 0) -> tuple[list[str], list[tuple]]:
    """The header and rows of the table whose header row starts with ``first_header``."""
    rows = list(ws.iter_rows(values_only=True))
    starts = [i for i, r in enumerate(rows) if r and r[0] == first_header]
    i = starts[nth]
    header = list(rows[i])
    body = []
    for r in rows[i + 1:]:
        if all(v is None for v in r):
            break
        body.append(r)
    return header, body


def _header_row(ws, first_header: str) -> int:
    return next(i for i, r in enumerate(ws.iter_rows(values_only=True), start=1) if r and r[0] == first_header)


def _all_text(path) -> str:
    with zipfile.ZipFile(path) as z:
        return "\n".join(z.read(n).decode("utf-8", "replace") for n in z.namelist())


def test_hand_statuses(tiny):
    df, q = tiny
    c = classify(df, q)
    assert c.status[ITEMS].astype(str).to_numpy().tolist() == HAND


def test_items_sheet_counts_match_classifier(tiny, tmp_path):
    df, q = tiny
    c = classify(df, q)
    path = write_item_report(df, q, tmp_path / "r.xlsx", classification=c)
    wb = openpyxl.load_workbook(path)
    header, rows = _sheet_table(wb["Items"], "Section")
    assert [r[header.index("Item")] for r in rows] == ITEMS  # interview order
    counts = c.counts()
    checked = 0
    for r in rows:
        item = r[header.index("Item")]
        for status in c.categories:
            assert r[header.index(H(status))] == counts.loc[item, status], (item, status)
            checked += 1
    assert checked == len(ITEMS) * len(c.categories)
    # Hand count from HAND (docs/contract.md §1): item c has dont_know 1, item_missing 1, breakoff 1, 5 in universe.
    rc = rows[ITEMS.index("c")]
    assert (rc[header.index(H("dont_know"))], rc[header.index(H("item_missing"))],
            rc[header.index(H("breakoff"))]) == (1, 1, 1)
    assert rc[header.index("D: in universe, excl. breakoff and left_blank")] == 5
    assert_allclose(rc[header.index("Item nonresponse rate")], 2 / 5, rtol=1e-12)
    first = _header_row(wb["Items"], "Section") + 1
    assert wb["Items"].cell(row=first, column=header.index("Item nonresponse rate") + 1).number_format.endswith("%")


def test_weighted_rate_against_direct_ratio(tiny, tmp_path):
    df, q = tiny
    path = write_item_report(df, q, tmp_path / "w.xlsx", weight="wt")
    header, rows = _sheet_table(openpyxl.load_workbook(path)["Items"], "Section")
    hand = np.array(HAND)
    w = df["wt"].to_numpy()
    nonresp = np.isin(hand, ["dont_know", "refused", "item_missing"])
    # In universe, not breakoff: answered, reasons, item_missing, wrong_code and invalid cells
    # whose rule held; here every non-skipped, non-off_route, non-gate_unknown, non-breakoff cell.
    universe = ~np.isin(hand, ["skipped", "off_route", "gate_unknown", "breakoff"])
    # Weighted proportion as a ratio of weighted totals (Cochran 1977, Sampling Techniques, 3rd ed.,
    # ch. 6, ratio estimator) [memory]: sum(w * y) / sum(w * x).
    expected = (w[:, None] * nonresp).sum(axis=0) / (w[:, None] * universe).sum(axis=0)
    got = np.array([r[header.index("Item nonresponse rate (weighted)")] for r in rows], dtype=float)
    assert_allclose(got, expected, rtol=1e-12)
    assert_allclose(expected[ITEMS.index("c")], 5 / 8.5, rtol=1e-12)  # (2 + 3) / (1 + 2 + 3 + 1.5 + 1), by hand
    dk = np.array([r[header.index(H("dont_know rate (weighted)"))] for r in rows], dtype=float)
    assert_allclose(dk, (w[:, None] * (hand == "dont_know")).sum(0) / (w[:, None] * universe).sum(0), rtol=1e-12)


def test_subgroup_rates_against_direct_ratio(tiny, tmp_path):
    df, q = tiny
    path = write_item_report(df, q, tmp_path / "s.xlsx", weight="wt", by=["region"])
    ws = openpyxl.load_workbook(path)["Subgroups"]
    header, rows = _sheet_table(ws, "Section", nth=1)  # the first table holds the group sizes
    hand = np.array(HAND)
    w = df["wt"].to_numpy()
    nonresp = np.isin(hand, ["dont_know", "refused", "item_missing"])
    universe = ~np.isin(hand, ["skipped", "off_route", "gate_unknown", "breakoff"])
    for label, sel in [("region = N", df["region"].eq("N").to_numpy()), ("region = S", df["region"].eq("S").to_numpy()),
                       ("region = (missing)", df["region"].isna().to_numpy())]:
        num = (w[sel, None] * nonresp[sel]).sum(0)
        den = (w[sel, None] * universe[sel]).sum(0)
        # ratio of weighted totals within the group (Cochran 1977, ch. 6) [memory]; blank where den == 0
        for j, item in enumerate(ITEMS):
            got = rows[j][header.index(label)]
            if den[j] == 0:
                assert got is None
            else:
                assert_allclose(got, num[j] / den[j], rtol=1e-12)


def test_patterns_match_pandas_groupby(tmp_path):
    rng = np.random.default_rng(7)
    n, names = 400, [f"x{i}" for i in range(7)]
    text = ("format: 1\nsurvey: {name: pat, title: Patterns, case_id: id}\ncodes:\n"
            "  - {value: -8, reason: dont_know, kind: nonresponse}\nbreakoff: {min_run: 99}\n"
            "sections:\n  - name: s\n    items:\n"
            + "".join(f"      - {{name: {x}, type: integer, range: [0, 5]}}\n" for x in names))
    q = loads_questionnaire(text)
    cols = {"id": np.arange(n)}
    for i, x in enumerate(names):
        p = 0.05 + 0.05 * i
        v = rng.integers(0, 6, n).astype(float)
        u = rng.random(n)
        v[u < p] = np.nan
        v[(u >= p) & (u < 1.5 * p)] = -8
        cols[x] = v
    df = pd.DataFrame(cols)
    c = classify(df, q)
    path = write_item_report(df, q, tmp_path / "p.xlsx", classification=c, top_items=4, top_patterns=6)
    ws = openpyxl.load_workbook(path)["Patterns"]
    header, rows = _sheet_table(ws, "Pattern")
    grid_items = header[header.index("Items missing") + 1:]
    rates = c.item_summary()["nonresponse_rate"]
    assert set(grid_items) == set(rates.sort_values(ascending=False).index[:4])
    # Reference: pandas groupby over the classifier's nonresponse mask.
    mask = c.nonresponse_mask()[grid_items].astype(int)
    ref = mask.groupby(grid_items).size().sort_values(ascending=False)
    shown = [r for r in rows if isinstance(r[0], int)]
    assert len(shown) == 6
    for r in shown:
        # one coding across the package: a marked square is item nonresponse, a blank one is not
        key = tuple(int(v == MARK) for v in r[header.index("Items missing") + 1:])
        assert set(r[header.index("Items missing") + 1:]) <= {MARK, None}
        assert r[1] == ref.loc[key]
        assert_allclose(r[2], ref.loc[key] / n, rtol=1e-12)
    assert [r[1] for r in shown] == sorted(ref.to_numpy(), reverse=True)[:6]
    other = next(r for r in rows if r[0] == "All others")
    assert other[1] == n - sum(r[1] for r in shown)


def test_structure_names_panes_filters(tiny, tmp_path):
    df, q = tiny
    path = write_item_report(df, q, tmp_path / "st.xlsx", weight="wt", by=["region"], min_base=1)
    wb = openpyxl.load_workbook(path)
    assert wb.sheetnames == list(SHEETS)
    top = _header_row(wb["Items"], "Section")
    assert wb["Items"].freeze_panes == f"C{top + 1}"
    assert wb["Items"].auto_filter.ref.startswith(f"A{top}:")
    assert wb["Items"].auto_filter.ref.endswith(str(top + len(ITEMS)))
    top = _header_row(wb["Routing faults"], "Case id")
    assert wb["Routing faults"].freeze_panes == f"A{top + 1}"
    assert wb["Routing faults"].auto_filter.ref == f"A{top}:F{top + 3}"  # header + 3 faults (HAND)
    top = [i for i, r in enumerate(wb["Subgroups"].iter_rows(values_only=True), start=1) if r and r[0] == "Section"][1]
    assert wb["Subgroups"].freeze_panes == f"D{top + 1}"
    assert wb["Completeness"].auto_filter.ref is not None
    assert wb["Patterns"].freeze_panes is not None
    with zipfile.ZipFile(path) as z:
        charts = [n for n in z.namelist() if n.startswith("xl/charts/chart")]
    assert len(charts) == 2
    # every item of the tiny file has D < 30 (the default minimum base): no worst-item chart and no
    # pattern column, only the completeness chart
    path = write_item_report(df, q, tmp_path / "st30.xlsx", weight="wt", by=["region"])
    with zipfile.ZipFile(path) as z:
        charts = [n for n in z.namelist() if n.startswith("xl/charts/chart")]
    assert len(charts) == 1
    assert any("no pattern" in t for t in texts(path, "Patterns"))


def test_faults_sheet_rows_cap_and_formula_text(tiny, tmp_path):
    df, q = tiny
    path = write_item_report(df, q, tmp_path / "f.xlsx", fault_rows=2)
    ws = openpyxl.load_workbook(path)["Routing faults"]
    header, rows = _sheet_table(ws, "Case id")
    listed = [r[:6] for r in rows if r[0] is not None]
    # Hand: ZQ-7003 b and f off_route, ZQ-7006 d invalid -> 3 faults, the first 2 listed (file order).
    assert [(r[0], r[1], r[2]) for r in listed] == [("ZQ-7003", "b", "Off route (off_route)"),
                                                    ("ZQ-7003", "f", "Off route (off_route)")]
    assert any("first 2 of 3" in str(ws.cell(row=r, column=1).value) for r in (2, 3))
    formula_cell = next(cell for row in ws.iter_rows(min_row=5) for cell in row if cell.value == "=2+3")
    assert formula_cell.data_type == "s"  # a stored value never becomes a formula
    totals = {r[7]: r[11] for r in rows if r[7] is not None}
    assert totals == {"b": 1, "d": 1, "f": 1}


def test_no_case_ids_anywhere(tiny, tmp_path):
    df, q = tiny
    with_ids = write_item_report(df, q, tmp_path / "ids.xlsx")
    without = write_item_report(df, q, tmp_path / "noids.xlsx", case_ids=False, weight="wt", by=["region"])
    assert "ZQ-7003" in _all_text(with_ids)  # the check below can fail
    text = _all_text(without)
    assert not any(i in text for i in IDS)
    wb = openpyxl.load_workbook(without)
    for ws in wb:
        for row in ws.iter_rows(values_only=True):
            assert not any(isinstance(v, str) and any(i in v for i in IDS) for v in row)


def test_completeness_bins_against_numpy_histogram(tiny, tmp_path):
    df, q = tiny
    path = write_item_report(df, q, tmp_path / "c.xlsx")
    header, rows = _sheet_table(openpyxl.load_workbook(path)["Completeness"], "Share of applicable items answered")
    hand = np.array(HAND)
    applicable = (~np.isin(hand, ["skipped", "off_route", "gate_unknown"])).sum(1)
    share = (hand == "answered").sum(1) / applicable
    # numpy.histogram as the reference binning; the last tenth is split into [0.9, 1) and exactly 1.
    hist, _ = np.histogram(share[share < 1], bins=np.linspace(0, 1, 11))
    got = [r[1] for r in rows[:11]]
    assert got == hist.tolist() + [int((share == 1).sum())]


def test_overview_has_definitions_cautions_and_hash(tiny, tmp_path):
    df, q = tiny
    src = tmp_path / "data.csv"
    df.to_csv(src, index=False)
    path = write_item_report(df, q, tmp_path / "o.xlsx", input_path=src)
    import hashlib
    values = [v for row in openpyxl.load_workbook(path)["Overview"].iter_rows(values_only=True) for v in row if v]
    assert hashlib.sha256(src.read_bytes()).hexdigest() in values  # hashlib as the reference digest
    text = " ".join(map(str, values))
    for phrase in ("MNAR", "data protection", "gate_unknown", "breakoff", "Tiny Test Survey", "tiny-test"):
        assert phrase in text


@pytest.mark.parametrize("kwargs,code", [
    ({"weight": "wgt"}, ProblemCode.MISSING_COLUMN),
    ({"by": ["regoin"]}, ProblemCode.MISSING_COLUMN),
    ({"top_items": 0}, ProblemCode.BAD_VALUE),
], ids=["unknown-weight", "unknown-by", "zero-top-items"])
def test_option_errors(tiny, tmp_path, kwargs, code):
    df, q = tiny
    with pytest.raises(SkipwiseError) as info:
        write_item_report(df, q, tmp_path / "e.xlsx", **kwargs)
    assert code in info.value.codes
    assert not (tmp_path / "e.xlsx").exists()


def test_negative_weight_rejected_and_no_overwrite(tiny, tmp_path):
    df, q = tiny
    bad = df.assign(wt=[1.0, -1.0, 1.0, np.nan, 1.0, 1.0])
    with pytest.raises(SkipwiseError) as info:
        write_item_report(bad, q, tmp_path / "e.xlsx", weight="wt")
    assert info.value.codes == [ProblemCode.BAD_WEIGHTS] and "2 missing" in str(info.value)
    target = tmp_path / "keep.xlsx"
    target.write_bytes(b"old")
    with pytest.raises(SkipwiseError):
        write_item_report(df, q, target, overwrite=False)
    assert target.read_bytes() == b"old"


@pytest.mark.skipif(not (shutil.which("soffice") or shutil.which("libreoffice")), reason="LibreOffice not installed")
def test_libreoffice_converts_to_pdf(tiny, tmp_path):
    df, q = tiny
    path = write_item_report(df, q, tmp_path / "lo.xlsx", weight="wt", by=["region"])
    exe = shutil.which("soffice") or shutil.which("libreoffice")
    run = subprocess.run([exe, "--headless", "--convert-to", "pdf", "--outdir", str(tmp_path), str(path)],
                         capture_output=True, timeout=180)
    assert run.returncode == 0
    assert (tmp_path / "lo.pdf").stat().st_size > 0


def test_one_pass_figures_equal_classifier_methods(tiny):
    from skipwise.report.tables import compute_figures

    df, q = tiny
    c = classify(df, q)
    w = df["wt"].to_numpy()
    fig = compute_figures(c, w)
    pd.testing.assert_frame_equal(fig.counts, c.counts())
    assert_allclose(fig.wcounts.to_numpy(), c.counts(w).to_numpy(), rtol=1e-12)
    # pandas' own counting of the delivered statuses, weighted and not
    for item in ITEMS:
        st = c.status[item].astype(str)
        assert_allclose(fig.wcounts.loc[item].reindex(st.unique()).to_numpy(),
                        pd.Series(w).groupby(st.to_numpy()).sum().reindex(st.unique()).to_numpy(), rtol=1e-12)
    cases = c.cases
    for name in ("applicable", "answered", "nonresponse", "faults"):
        assert getattr(fig, name).tolist() == cases[name].tolist(), name
    assert fig.broke_off.tolist() == cases["broke_off"].tolist()
    # And against the statuses stated by hand (HAND), not only against the classifier's methods.
    hand = pd.DataFrame(HAND, columns=ITEMS)
    for item in ITEMS:
        for status, n in hand[item].value_counts().items():
            assert fig.counts.loc[item, status] == n, (item, status)
    assert fig.answered.tolist() == (hand == "answered").sum(axis=1).tolist()


def test_worst_items_chart_leaves_out_small_bases_and_sorts(tiny, tmp_path):
    df, q = tiny
    path = write_item_report(df, q, tmp_path / "c.xlsx", min_base=5)
    header, rows = _sheet_table(openpyxl.load_workbook(path)["Charts"], "Item")
    rows = [(r[0], r[1]) for r in rows]
    # Hand, from HAND: D = a 6, b 2, c 5, d 5, e 5, f 2; nonresponse a 1, c 2, d 0, e 1.
    # b and f (D = 2 < 5) are left out, and d (no nonresponse: nothing to chart); worst first.
    assert [r[0] for r in rows] == ["c", "e", "a"]
    assert_allclose([r[1] for r in rows], [2 / 5, 1 / 5, 1 / 6], rtol=1e-12)
    items = openpyxl.load_workbook(path)["Items"]
    header, table = _sheet_table(items, "Section")
    marked = {r[header.index("Item")] for r in table if r[header.index("Below minimum base")]}
    assert marked == {"b", "f"}
