"""``skipwise codebook``: the data file's documentation as DDI-Codebook 2.5 XML, HTML or Markdown."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated, Optional

import typer

from skipwise.cli.app import app, fail
from skipwise.errors import SkipwiseError

SUFFIXES = (".xml", ".html", ".md")

HELP = (
    "Document a data file for analysts and archives. The suffix of OUT picks the form: .xml is the "
    "archive standard DDI-Codebook 2.5 (DDI Alliance 2012), valid against its published schema; "
    ".html and .md are for people.\n\n"
    "Per variable: label, question text (the item's text:), universe in words with the routing rule "
    "as written, value labels and special codes with their unweighted and weighted frequencies over "
    "all cases, summary statistics of numeric items (over answered cells), the status and weight "
    "variables, replicate weights with their method and scale factors. Study-level metadata come from "
    "the questionnaire's study: block, overridden key by key by the run plan's (--plan).\n\n"
    "Caution: frequencies describe the stored file; weights do not repair data missing not at random "
    "(MNAR). A codebook holds no answers, but check value labels for identifying text before you "
    "publish it, under your organization's data protection rules."
)


@app.command("codebook", help=HELP)
def codebook_command(
    data: Annotated[Path, typer.Argument(help="Data file to document (e.g. the package's .sav).")],
    questionnaire: Annotated[Path, typer.Option("-q", "--questionnaire", help="Questionnaire file (YAML).")],
    out: Annotated[Path, typer.Option("-o", "--out", help="Codebook to write: .xml (DDI), .html or .md.")],
    plan: Annotated[Optional[Path], typer.Option(
        "--plan", help="Run plan: its study: block, the weighting plan's weights and replicate method.")] = None,
    weight: Annotated[Optional[str], typer.Option(
        "--weight", help="Column of weights for the weighted frequencies (default: the final weight, "
                         "when the data hold one).")] = None,
    min_base: Annotated[Optional[int], typer.Option(
        "--min-base", min=1, help="Items with fewer cases in D are marked 'too few to judge' (default 30, "
                                  "common practice).")] = None,
    overwrite: Annotated[bool, typer.Option("--overwrite", help="Replace an existing codebook.")] = False,
) -> None:
    from skipwise.cli.common import classify_with_progress, load_inputs
    from skipwise.ddi.build import codebook_input, file_date
    from skipwise.publish import check_writable, publish_file

    try:
        suffix = out.suffix.lower()
        if suffix not in SUFFIXES:
            raise SkipwiseError(f"output {out.name} must end in .xml (DDI-Codebook 2.5), .html or .md")
        check_writable(out, overwrite=overwrite, inputs=tuple(p for p in (data, questionnaire, plan) if p))
        study, prefix, design, wlabels = {}, None, None, {}
        if plan is not None:
            study, prefix, design, wlabels = _from_plan(plan)
        frame, q = load_inputs(data, questionnaire)
        if weight is not None and weight not in frame.columns:
            raise SkipwiseError(f"--weight: column '{weight}' is not in {data.name}")
        if prefix is None and any(str(c).startswith("wt_") for c in frame.columns):
            prefix = "wt_"
        cl = classify_with_progress(frame, q)
        inp = codebook_input(frame, q, file_name=data.name, classification=cl, weight_prefix=prefix,
                             weight=weight, weight_labels=wlabels, design=design, study=study,
                             produced=file_date(data), min_base=min_base)
        with publish_file(out, overwrite=overwrite) as tmp:
            if suffix == ".xml":
                from skipwise.ddi import ddi_bytes

                tmp.write_bytes(ddi_bytes(inp))
            else:
                from skipwise.ddi.human import codebook_html, codebook_markdown

                text = codebook_markdown(inp) if suffix == ".md" else codebook_html(inp)
                tmp.write_text(text, encoding="utf-8")
    except SkipwiseError as err:
        fail(err)
        return
    typer.echo(f"wrote {out} ({len(inp.frame.columns):,} variables, {len(inp.frame):,} cases)")


def _from_plan(path: Path):
    """Study block, weight prefix, replicate design and weight labels from a run plan."""
    from skipwise.io import read_survey
    from skipwise.pipeline.plan import load_run_plan
    from skipwise.weighting.plan import load_plan
    from skipwise.weighting.weigh import replicate_design_of

    rp = load_run_plan(path)
    if rp.weighting_plan is None:
        return dict(rp.study), None, None, {}
    wp = load_plan(rp.weighting_plan)
    design = None
    if wp.replicates is not None:
        design = replicate_design_of(read_survey(rp.weighting_data or rp.data), wp)
    return dict(rp.study), wp.prefix, design, {}
