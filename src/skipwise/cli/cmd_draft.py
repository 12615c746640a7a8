"""`skipwise draft`: a questionnaire draft from a data file's labels and missing-value metadata."""

from __future__ import annotations

import re
from collections import Counter
from pathlib import Path
from typing import Annotated, Optional

import typer

from skipwise.cli.app import app, fail
from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError


def default_name(path: Path) -> str:
    """A short survey id from the data file's name."""
    return re.sub(r"[^0-9a-z]+", "-", path.stem.lower()).strip("-") or "survey"


@app.command("draft")
def draft_command(
    data: Annotated[Path, typer.Argument(help="Survey data file (.sav, .zsav, .dta, .csv, .xlsx, .parquet, .sas7bdat, "
                                              ".xpt) or a DDI-Codebook 2.5 document (.xml).")],
    out: Annotated[Optional[Path], typer.Option("--out", "-o", help="Questionnaire file to write (.yaml).")] = None,
    output_old: Annotated[Optional[Path], typer.Option("--output", hidden=True)] = None,
    case_id: Annotated[Optional[str], typer.Option(
        "--case-id", help="Case id column (default: the first column whose values are unique and filled).")] = None,
    name: Annotated[Optional[str], typer.Option(
        "--name", help="Short survey id for 'survey: name' (default: from the data file's name).")] = None,
    overwrite: Annotated[bool, typer.Option("--overwrite", help="Replace OUTPUT if it exists.")] = False,
) -> None:
    """Draft a questionnaire file from a data file's labels and missing-value definitions,
    or from a DDI-Codebook 2.5 document (.xml: names, labels, question text, categories and
    missing codes; its free-text universes become comments to turn into asked_if rules).

    One item per column in file order, labelled from the variable labels;
    categories from value labels; special codes from SPSS missing values, Stata
    extended missing values and labels such as "Don't know" or "Refused"; ranges
    from the observed values.  Every guess carries a comment ('guessed',
    'observed'); routing (asked_if) is left for you to add.  The draft loads as a
    questionnaire as written, but it is a starting point to review, not a finished
    questionnaire.  Observed ranges come from respondents' answers: keep the draft
    under your data protection rules.
    """
    from skipwise.cli.common import out_option
    from skipwise.draft import draft_questionnaire, write_draft
    from skipwise.io import read_survey

    output = out_option(out, output_old)
    try:
        if output.suffix.lower() not in (".yaml", ".yml"):
            raise SkipwiseError(Problem(code=ProblemCode.FILE_FORMAT, category=Category.USAGE, file=str(output),
                                        message=f"a questionnaire file must end in .yaml or .yml, not "
                                                f"'{output.suffix or '(none)'}'",
                                        hint="name the output e.g. questionnaire.yaml"))
        if output.resolve() == data.resolve():
            raise SkipwiseError(Problem(code=ProblemCode.OUTPUT_EXISTS, category=Category.USAGE, file=str(output),
                                        message="the output would replace the data file",
                                        hint="choose another output name"))
        if data.suffix.lower() == ".xml":  # a DDI-Codebook 2.5 document: an archive's metadata as a start
            from skipwise.ddi.read import draft_from_ddi

            draft = draft_from_ddi(data, case_id=case_id, name=name)
        else:
            frame = read_survey(data)
            draft = draft_questionnaire(frame, case_id=case_id, name=name or default_name(data), source=data.name)
        write_draft(draft, output, overwrite=overwrite)
    except SkipwiseError as err:
        fail(err)
    types = Counter(it.type.value for it in draft.items)
    n_codes = sum(len(it.codes) for it in draft.items) + len(draft.codes)
    typer.echo(f"wrote {output}: {len(draft.items)} item(s) ("
               + ", ".join(f"{n} {t}" for t, n in types.most_common()) + f"), case id '{draft.case_id}', "
               f"{len(draft.codes)} global and {n_codes - len(draft.codes)} item code(s).")
    typer.echo("Review every line marked 'guessed' or 'observed' and add the routing (asked_if) before "
               "classifying; then run 'skipwise check'.")
