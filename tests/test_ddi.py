"""DDI-Codebook 2.5 export and the human codebook.

The outside references: the published XML Schema of DDI-Codebook 2.5 (DDI Alliance 2012; copied
under tests/standards/ with its licence), validated with lxml; frequencies and statistics
recomputed with pandas / numpy from the data.
"""

from __future__ import annotations

import textwrap
from pathlib import Path

import pandas as pd
import pytest
from typer.testing import CliRunner

from skipwise.classify import classify
from skipwise.cli import app
from skipwise.ddi import DDI_NAMESPACE, clean_xml_text, ddi_bytes
from skipwise.ddi.build import codebook_input
from skipwise.ddi.human import codebook_html, codebook_markdown, fmt_number
from skipwise.questionnaire import loads_questionnaire

etree = pytest.importorskip("lxml.etree")
SCHEMA = Path(__file__).parent / "standards" / "ddi-codebook-2.5" / "codebook.xsd"
NS = {"d": DDI_NAMESPACE}

Q = textwrap.dedent("""
    format: 1
    survey: {name: ddi-test, title: "Orrin Test <Survey>", case_id: id}
    study: {population: "Households of Orrin", mode: face to face, fieldwork_start: "2026-03-01"}
    context: [region]
    codes:
      - {value: -1, reason: not_applicable, kind: structural, label: Not asked}
      - {value: -9, reason: refused, kind: nonresponse, label: Refused}
    sections:
      - name: s
        label: Section one
        items:
          - {name: work, label: "In paid work <b>now</b>", type: categorical, values: {1: "Yes", 2: "No \\0"}}
          - {name: hours, label: Hours, type: integer, range: [1, 80], asked_if: work == 1}
""")


@pytest.fixture(scope="module")
def case():
    q = loads_questionnaire(Q)
    frame = pd.DataFrame({"id": [1, 2, 3, 4, 5], "region": [1, 1, 2, 2, 2], "work": [1, 1, 2, -9, 1],
                          "hours": [40, 35, -1, -1, -9], "wt_final": [1.5, 2.0, 1.0, 0.5, 1.0]})
    cl = classify(frame, q)
    inp = codebook_input(frame, q, file_name="orrin.csv", classification=cl, weight_prefix="wt_",
                         study={"mode": "telephone"})
    return q, frame, cl, inp


def _doc(inp):
    return etree.fromstring(ddi_bytes(inp))


def test_document_is_valid_against_the_published_schema(case):
    schema = etree.XMLSchema(etree.parse(str(SCHEMA)))
    doc = _doc(case[3])
    assert schema.validate(doc), schema.error_log


def test_category_frequencies_equal_pandas_counts(case):
    _, frame, _, inp = case
    doc = _doc(inp)
    for col in ("work", "hours"):
        var = doc.find(f"d:dataDscr/d:var[@name='{col}']", NS)
        counts = frame[col].value_counts()
        wsum = frame.groupby(col)["wt_final"].sum()
        for cat in var.findall("d:catgry", NS):
            value = int(cat.findtext("d:catValu", namespaces=NS))
            freq = [s for s in cat.findall("d:catStat", NS) if s.get("wgtd") != "wgtd"]
            wfreq = [s for s in cat.findall("d:catStat", NS) if s.get("wgtd") == "wgtd"]
            assert int(freq[0].text) == counts.get(value, 0)
            assert float(wfreq[0].text) == pytest.approx(wsum.get(value, 0.0))


def test_special_codes_are_missing_categories_with_their_reason(case):
    doc = _doc(case[3])
    cats = {c.findtext("d:catValu", namespaces=NS): c for c in
            doc.findall("d:dataDscr/d:var[@name='hours']/d:catgry", NS)}
    assert cats["-9"].get("missing") == "Y" and cats["-9"].get("missType") == "refused"
    assert cats["-1"].get("missing") == "Y"


def test_summary_statistics_cover_answered_cells_only(case):
    _, frame, cl, inp = case
    doc = _doc(inp)
    stats = {s.get("type"): float(s.text) for s in doc.findall("d:dataDscr/d:var[@name='hours']/d:sumStat", NS)}
    answered = frame.loc[cl.status["hours"] == "answered", "hours"].astype(float)
    assert stats["vald"] == len(answered) == 2
    assert stats["invd"] == 3
    assert stats["mean"] == pytest.approx(answered.mean())           # numpy/pandas as the reference
    assert stats["stdev"] == pytest.approx(answered.std(ddof=1))
    assert (stats["min"], stats["max"]) == (35, 40)


def test_universe_in_words_and_rule_as_written(case):
    doc = _doc(case[3])
    var = doc.find("d:dataDscr/d:var[@name='hours']", NS)
    assert var.findtext("d:universe", namespaces=NS) == "Asked if 'In paid work <b>now</b>' is 'Yes'."
    assert var.findtext("d:notes", namespaces=NS) == "asked_if: work == 1"


def test_study_block_from_questionnaire_overridden_key_by_key(case):
    doc = _doc(case[3])
    summ = doc.find("d:stdyDscr/d:stdyInfo/d:sumDscr", NS)
    assert summ.findtext("d:universe", namespaces=NS) == "Households of Orrin"
    assert summ.find("d:collDate", NS).get("event") == "start"
    assert doc.findtext("d:stdyDscr/d:method/d:dataColl/d:collMode", namespaces=NS) == "telephone"


def test_status_and_weight_variables_described(case):
    q, frame, cl, _ = case
    from skipwise.classify.export import with_status_columns

    out, meta = with_status_columns(frame, cl)
    inp = codebook_input(out, q, meta=meta, file_name="orrin.sav", classification=cl, weight_prefix="wt_")
    doc = _doc(inp)
    status = doc.find("d:dataDscr/d:var[@name='hours_status']", NS)
    assert status is not None and status.findtext("d:labl", namespaces=NS)
    assert doc.find("d:dataDscr/d:var[@name='wt_final']", NS).get("wgt") == "wgt"
    schema = etree.XMLSchema(etree.parse(str(SCHEMA)))
    assert schema.validate(doc), schema.error_log


def test_characters_xml_forbids_are_removed():
    assert clean_xml_text("a\x00b\x07c\td\ne") == "abc\td\ne"


def test_human_codebook_escapes_labels_and_links_its_contents(case):
    inp = case[3]
    html = codebook_html(inp)
    md = codebook_markdown(inp)
    assert "<b>now</b>" not in html and "&lt;b&gt;now&lt;/b&gt;" in html
    assert "<b>now</b>" not in md and "&lt;b&gt;now&lt;/b&gt;" in md
    assert '<a href="#v-hours">' not in html  # the contents link sections, the overview lists variables
    assert '<a href="#v-section-s">' in html and "[Section: Section one](#v-section-s)" in md
    assert "Asked if 'In paid work &lt;b&gt;now&lt;/b&gt;' is 'Yes'." in md


@pytest.mark.parametrize("value,text", [(27550.0, "27,550"), (64274.00000000001, "64,274"), (0.455088542777896, "0.4551"),
                                        (2.755e4 + 0.25, "27,550"), (1234567, "1,234,567"), (0.000123456, "0.0001235")])
def test_numbers_for_people_have_no_exponent(value, text):
    assert fmt_number(value) == text


def test_codebook_command_writes_each_form(tmp_path):
    q = tmp_path / "q.yaml"
    q.write_text(Q)
    data = tmp_path / "d.csv"
    pd.DataFrame({"id": [1, 2], "region": [1, 2], "work": [1, 2], "hours": [40, -1]}).to_csv(data, index=False)
    runner = CliRunner()
    for suffix in (".xml", ".html", ".md"):
        out = tmp_path / f"cb{suffix}"
        res = runner.invoke(app, ["codebook", str(data), "-q", str(q), "-o", str(out)])
        assert res.exit_code == 0, res.output
        assert out.stat().st_size > 0
    etree.XMLSchema(etree.parse(str(SCHEMA))).assertValid(etree.parse(str(tmp_path / "cb.xml")))
    bad = runner.invoke(app, ["codebook", str(data), "-q", str(q), "-o", str(tmp_path / "cb.pdf")])
    assert bad.exit_code == 1 and "must end in .xml" in bad.output


def test_draft_from_a_ddi_document_round_trips_names_labels_categories_and_codes(case, tmp_path):
    q, _, _, inp = case
    xml = tmp_path / "cb.xml"
    xml.write_bytes(ddi_bytes(inp))
    out = tmp_path / "drafted.yaml"
    res = CliRunner().invoke(app, ["draft", str(xml), "-o", str(out)])
    assert res.exit_code == 0, res.output
    drafted = loads_questionnaire(out.read_text())
    assert drafted.case_id == "id" and drafted.name == "ddi-test"
    for name in ("work", "hours"):
        assert drafted.item(name).label == q.item(name).label
    assert dict(drafted.item("work").values) == {1: "Yes", 2: "No"}  # NUL removed on export, spaces trimmed
    assert {(c.value, c.reason, c.kind) for c in drafted.item("hours").codes} == \
        {(c.value, c.reason, c.kind) for c in q.item("hours").codes}
    assert "universe (from the DDI document, as free text): Asked if" in out.read_text()
    assert drafted.item("hours").range == (1, 80)


def test_draft_refuses_a_document_with_entities(tmp_path):
    bomb = tmp_path / "bomb.xml"
    bomb.write_text('<?xml version="1.0"?><!DOCTYPE x [<!ENTITY a "aaaa">]><codeBook xmlns="ddi:codebook:2_5"/>')
    res = CliRunner().invoke(app, ["draft", str(bomb), "-o", str(tmp_path / "d.yaml")])
    assert res.exit_code == 1 and "DOCTYPE" in res.output and "Traceback" not in res.output
    assert not (tmp_path / "d.yaml").exists()


def test_the_documented_study_block_loads_and_reaches_the_ddi_document():
    import re

    doc_text = (Path(__file__).parents[1] / "docs" / "codebook.md").read_text()
    block = re.search(r"```yaml\n(study:\n.*?)```", doc_text, re.S).group(1)
    text = Q.replace('study: {population: "Households of Orrin", mode: face to face, fieldwork_start: "2026-03-01"}\n',
                     block)
    q = loads_questionnaire(text)
    assert q.study["fieldwork_end"] == "2026-05-29" and q.study["producer"] == "Marrowby Valley Statistics Unit"
    frame = pd.DataFrame({"id": [1], "region": [1], "work": [1], "hours": [40]})
    root = etree.fromstring(ddi_bytes(codebook_input(frame, q, file_name="x.csv", classification=classify(frame, q))))
    assert root.findtext("d:stdyDscr/d:method/d:dataColl/d:sampProc", namespaces=NS).startswith("Stratified two-stage")
    assert root.findtext("d:stdyDscr/d:citation/d:titlStmt/d:IDNo", namespaces=NS) == "marrowby-life-2026"
    etree.XMLSchema(etree.parse(str(SCHEMA))).assertValid(root)


def test_a_study_block_with_an_unknown_key_or_a_list_is_refused():
    from skipwise.errors import SkipwiseError

    bad = Q.replace('study: {population: "Households of Orrin", mode: face to face, fieldwork_start: "2026-03-01"}',
                    "study: {populaton: x, mode: [a, b]}")
    with pytest.raises(SkipwiseError) as err:
        loads_questionnaire(bad)
    text = err.value.render()
    assert "unknown key 'populaton'" in text and "did you mean 'population'" in text
    assert "study key 'mode' must be a single text" in text
