"""Presentation rules of the three workbooks of the demo package, checked with openpyxl (no office suite).

The rules (titles and explanations, number formats, widths, print setup, fonts, no formulas from data,
no absolute paths, no empty sheets) are the project's own; the outcome-rate check at the end uses the
published formula of the Standard Definitions (AAPOR) on the counts the workbook shows.
"""

from __future__ import annotations

import math
import re
import zipfile

import pytest
from openpyxl import load_workbook

from sheetread import table
from openpyxl.utils import get_column_letter

from skipwise.sheetstyle import FONT_NAME, MARK, MIN_PRINT_SCALE, PAGE_WIDTH_UNITS, PCT, pages_wide

BOOKS = ("item_report", "diagnostics", "weighting")
FONTS = {FONT_NAME, "Liberation Sans"}
#: Internal keys that must never show as headers (snake_case of the result objects).
INTERNAL = {"in_scope", "nonresponse_rate", "model_p", "model_p_adjusted", "d2_contribution", "n_cases",
            "lr_p_value", "max_abs_bias", "kish_deff", "effective_n", "weight_in", "std_err", "or_low",
            "or_high", "p_value", "share_respondents", "partial_unconditional", "e_method", "neg_log10_model_p"}


@pytest.fixture(scope="module")
def books(demo_output):
    out, _ = demo_output
    return {name: load_workbook(out / "package" / f"{name}.xlsx") for name in BOOKS}


def _cells(ws):
    for row in ws.iter_rows():
        for c in row:
            if c.value is not None:
                yield c


@pytest.mark.parametrize("name", BOOKS)
def test_every_sheet_opens_with_title_and_explanation(books, name):
    for ws in books[name]:
        assert isinstance(ws["A1"].value, str) and ws["A1"].font.b, (name, ws.title)
        assert isinstance(ws["A2"].value, str) and len(ws["A2"].value) > 30, (name, ws.title)
        assert ws.max_row >= 3, (name, ws.title)  # no sheet without content


@pytest.mark.parametrize("name", BOOKS)
def test_numbers_formatted_fonts_named_no_formulas_no_paths(books, name):
    for ws in books[name]:
        for c in _cells(ws):
            where = (name, ws.title, c.coordinate, c.value)
            assert c.data_type != "f", where  # nothing from data becomes a formula
            if isinstance(c.value, (int, float)) and not isinstance(c.value, bool):
                assert c.number_format != "General", where
            if isinstance(c.value, str):
                assert not re.search(r"\bnan\b|\bNone\b|\(nan%\)", c.value), where
                assert not re.search(r"(^|\s)/(tmp|home|work|root|Users)/|[A-Za-z]:\\\\", c.value), where
            assert c.font.name in FONTS, where


@pytest.mark.parametrize("name", BOOKS)
def test_print_setup_and_panes(books, name):
    for ws in books[name]:
        ps = ws.page_setup
        assert ps.orientation == "landscape", ws.title
        assert ws.sheet_properties.pageSetUpPr.fitToPage, ws.title
        widths = [ws.column_dimensions[get_column_letter(j)].width for j in range(1, ws.max_column + 1)]
        # one page wide unless that would print below the smallest readable scale
        assert (ps.fitToWidth == 1) == (sum(widths) <= PAGE_WIDTH_UNITS[True] / MIN_PRINT_SCALE), ws.title
        assert sum(widths) / ps.fitToWidth <= PAGE_WIDTH_UNITS[True] / MIN_PRINT_SCALE, ws.title
        if ps.fitToWidth > 1:
            assert ps.pageOrder == "overThenDown", ws.title
        assert "&A" in ws.oddFooter.center.text and "&P" in ws.oddFooter.center.text, ws.title
        if ws.auto_filter.ref:
            header_row = int(re.match(r"[A-Z]+(\d+):", ws.auto_filter.ref).group(1))
            assert ws.freeze_panes is not None and int(re.sub(r"[A-Z]", "", ws.freeze_panes)) == header_row + 1


@pytest.mark.parametrize("name", BOOKS)
def test_headers_human_and_fitting(books, name):
    for ws in books[name]:
        for c in _cells(ws):
            if c.fill is None or c.fill.fgColor is None or c.fill.fgColor.rgb not in ("002F4858", "FF2F4858"):
                continue
            assert c.value not in INTERNAL, (ws.title, c.value)
            width = ws.column_dimensions[c.column_letter].width
            if c.alignment.text_rotation == 90:
                # a rotated header (an item name) is shown whole: the row is tall enough
                assert ws.row_dimensions[c.row].height >= 5.5 * len(str(c.value)), (ws.title, c.value)
                continue
            longest = max(len(w) for w in str(c.value).split())
            assert width >= longest, (ws.title, c.value, width)  # wrapped, every word fits a line
            lines = math.ceil(len(str(c.value)) / max(width - 1.5, 1))
            if lines > 1:
                assert (ws.row_dimensions[c.row].height or 0) >= 12 * min(lines, 5), (ws.title, c.value)


@pytest.mark.parametrize("name", BOOKS)
def test_percent_cells_never_hash(books, name):
    # "100.0%" needs 6 characters; a narrower column prints "###"
    for ws in books[name]:
        for c in _cells(ws):
            if isinstance(c.value, float) and c.number_format.startswith(PCT):
                assert ws.column_dimensions[c.column_letter].width >= 6.5, (ws.title, c.coordinate)


def test_sheets_without_content_are_left_out(books, demo_output):
    # the demo plan asks for no sensitivity analysis and nothing is collapsed in its weighting
    assert "Sensitivity" not in books["diagnostics"].sheetnames
    assert "Collapsing" not in books["weighting"].sheetnames
    sug = table(books["diagnostics"], "Suggestions", "Item")
    glance = table(books["diagnostics"], "Items at a glance", "Item").set_index("Item")
    assert (glance.loc[sug["Item"], "Nonresponse"] > 0).all()  # only items with something to handle


def test_long_listing_prints_its_first_rows(books):
    ws = books["item_report"]["Routing faults"]
    assert ws.print_title_rows  # the header repeats on every printed page
    listed = table(books["item_report"], "Routing faults", "Case id")
    if len(listed) > 200:
        assert ws.print_area, "the full listing is the CSV; the print area holds its first rows"


def test_pattern_cells_mark_nonresponse(books):
    # one coding across the package: a marked cell is item nonresponse (item report and diagnostics)
    for book, sheet in (("item_report", "Patterns"), ("diagnostics", "Patterns")):
        pat = table(books[book], sheet, "Pattern")
        grid = pat.iloc[:, list(pat.columns).index("Items missing" if "Items missing" in pat.columns
                                                     else "Contribution to d²") + 1:]
        values = {v for v in grid.to_numpy().ravel() if isinstance(v, str)}
        assert values <= {MARK, ""}, (book, values)
        counted = (grid == MARK).sum(axis=1)
        key = "Items missing" if "Items missing" in pat.columns else "Items with nonresponse"
        rows = pat[key].notna()
        assert (counted[rows] == pat.loc[rows, key]).all(), book


def test_charts_unsmoothed_with_axis_titles(demo_output):
    out, _ = demo_output
    for name in ("item_report", "diagnostics"):
        with zipfile.ZipFile(out / "package" / f"{name}.xlsx") as z:
            charts = [z.read(n).decode() for n in z.namelist() if n.startswith("xl/charts/chart")]
        assert charts, name
        for xml in charts:
            assert "<smooth val=\"1\"" not in xml and "<c:smooth val=\"1\"" not in xml
            assert xml.count("<title>") + xml.count("<c:title>") >= 3, name  # chart title and both axis titles


def test_worst_items_sorted_and_at_the_minimum_base(books):
    worst = table(books["item_report"], "Charts", "Item")
    rates = worst["Item nonresponse rate"].astype(float).tolist()
    assert rates == sorted(rates, reverse=True)
    assert (worst["D (cells in universe)"] >= 30).all()  # default minimum base, common practice, no source
    glance = table(books["diagnostics"], "Items at a glance", "Item", nth=1)
    assert (glance["In scope"] >= 30).all()


def test_rr1_is_a_percent_from_the_standard_formula(books):
    wb = books["weighting"]
    rates = table(wb, "Outcome rates", "Rate").set_index("Rate")
    cats = table(wb, "Outcome rates", "Category").set_index("Category")["Cases"]
    # RR1 = I / ((I + P) + (R + NC + O) + (UH + UO)): AAPOR Standard Definitions, response rate 1
    rr1 = cats["I"] / (cats["I"] + cats["P"] + cats["R"] + cats["NC"] + cats["O"] + cats["UH"] + cats["UO"])
    assert rates.loc["RR1", "Unweighted"] == pytest.approx(rr1, rel=1e-12)
    ws = wb["Outcome rates"]
    cell = next(c for c in _cells(ws) if c.value == rates.loc["RR1", "Unweighted"])
    assert cell.number_format == PCT
    over = wb["Overview"]
    total = next(r for r in over.iter_rows() if r[0].value == "Sum of base weights")[1]
    assert total.number_format.startswith("#,##0")


@pytest.mark.parametrize("name", BOOKS)
def test_labels_not_cut_off_by_their_values(books, name):
    # A label in column A with its value in column B is cut off on screen and on paper when it is
    # longer than column A (common practice of spreadsheet layout, no source). Label cells: bold,
    # unfilled, not wrapped (headers are filled, wrapped terms may run over several lines).
    seen = []
    for ws in books[name].worksheets:
        width = ws.column_dimensions["A"].width
        for r in ws.iter_rows(min_row=4, max_col=2):
            a = r[0]
            if (isinstance(a.value, str) and len(r) > 1 and r[1].value is not None and a.font.b
                    and a.fill.fill_type is None and not a.alignment.wrap_text):
                seen.append(a.value)
                assert len(a.value) <= width, (ws.title, a.value, width)
    assert seen
    if name == "weighting":
        assert "e (eligible share of unknown-eligibility cases)" in seen


def test_label_of_a_wrapped_text_sits_level_with_its_first_line(books):
    # A label beside a wrapped, several-line text belongs at the top of the row, not below the text
    # (common practice of spreadsheet layout, no source).
    ws = books["item_report"]["Overview"]
    notes = [r[0] for r in ws.iter_rows() if r[0].value == "Note"]
    assert notes
    assert all(c.alignment.vertical == "top" for c in notes)
    assert all(r[1].alignment.wrap_text for r in ws.iter_rows() if r[0].value == "Note")


def test_wide_items_sheet_prints_on_readable_pages_with_its_key_columns(books):
    ws = books["item_report"]["Items"]  # 39 columns, about 560 width units: 27% on one page
    assert ws.page_setup.fitToWidth >= 2
    assert ws.print_title_cols == "$A:$B"  # section and item on every page
    assert ws.freeze_panes.startswith("C")


def test_pages_wide_by_hand():
    # room per page at the smallest scale: 150 / 0.6 = 250 units
    assert pages_wide([10] * 25, 2, 150.0) == (1, 0)  # 250 units fit
    assert pages_wide([10] * 26, 2, 150.0) == (2, 2)  # (260 - 20) / (250 - 20) = 1.04 -> 2
    assert pages_wide([10] * 60, 2, 150.0) == (3, 2)  # (600 - 20) / 230 = 2.52 -> 3
    assert pages_wide([130, 200], 1, 150.0) == (2, 0)  # a 130-unit key column is not repeated: 330 / 250
