"""Result records shared by the imputation methods.

Every method returns a frozen record that carries the completed data *and*
what the method cost: how many cells were filled per item, which donors or
models were used, and the cautions that apply to the method.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import numpy as np
import pandas as pd

__all__ = ["ImputationResult", "MNAR_CAUTION", "flag_columns", "as_float_frame", "check_columns"]

#: Shown with every imputation result and in the command help.
MNAR_CAUTION = (
    "Imputation does not repair data missing not at random (MNAR): if whether an answer is "
    "missing depends on the answer itself, after allowing for the classes and covariates used, "
    "the completed data stay biased. Follow your organization's methodology standards."
)


@dataclass(frozen=True, kw_only=True)
class ImputationResult:
    """A completed copy of the data plus a record of every filled cell.

    Attributes
    ----------
    data
        The completed frame (a copy; the input is never modified).
    imputed
        Boolean frame, same index as ``data``, one column per treated item:
        True where the value was filled in by the method.
    method
        Short method name (``"mean"``, ``"hotdeck"``, ``"pmm"``, ...).
    unfilled
        Per item, the number of missing cells the method could not fill.
    notes
        What the method did that a reader of the output should know
        (collapsed classes, fallbacks, donor limits, ...).
    cautions
        Method-specific cautions, always ending with :data:`MNAR_CAUTION`.
    """

    data: pd.DataFrame
    imputed: pd.DataFrame
    method: str
    unfilled: pd.Series
    notes: tuple[str, ...] = ()
    cautions: tuple[str, ...] = (MNAR_CAUTION,)

    @property
    def n_imputed(self) -> pd.Series:
        """Number of filled cells per item."""
        return self.imputed.sum().astype("int64")

    def flags(self, suffix: str = "_imp") -> pd.DataFrame:
        """One 0/1 ``int8`` flag column per item (``<item><suffix>``)."""
        return flag_columns(self.imputed, suffix=suffix)

    def summary(self) -> str:
        """A few lines of plain text: counts, notes and cautions."""
        lines = [f"method: {self.method}"]
        for item, n in self.n_imputed.items():
            left = int(self.unfilled.get(item, 0))
            lines.append(f"  {item}: {n:,} imputed" + (f", {left:,} left missing" if left else ""))
        lines += [f"note: {n}" for n in self.notes]
        lines += [f"caution: {c}" for c in self.cautions]
        return "\n".join(lines)


def flag_columns(imputed: pd.DataFrame, *, suffix: str = "_imp") -> pd.DataFrame:
    """Turn a boolean ``imputed`` frame into ``<item><suffix>`` int8 flag columns."""
    out = imputed.astype("int8")
    out.columns = [f"{c}{suffix}" for c in imputed.columns]
    return out


def as_float_frame(data: pd.DataFrame, items: Sequence[str]) -> np.ndarray:
    """Items as a float64 array with NaN for missing (pandas NA included)."""
    return data.loc[:, list(items)].astype("float64").to_numpy(copy=True)


def check_columns(data: pd.DataFrame, names: Sequence[str], *, numeric: bool = False,
                  role: str = "item") -> None:
    """Raise one :class:`~skipwise.errors.SkipwiseError` listing every absent or non-numeric column."""
    from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError, did_you_mean

    problems: list[Problem] = []
    for name in names:
        if name not in data.columns:
            problems.append(Problem(
                code=ProblemCode.MISSING_COLUMN, category=Category.DATA, item=str(name),
                message=f"{role} column '{name}' is not in the data",
                hint=did_you_mean(str(name), map(str, data.columns)) or "check the column name"))
        elif numeric and not (pd.api.types.is_numeric_dtype(data[name])
                              or pd.api.types.is_bool_dtype(data[name])):
            problems.append(Problem(
                code=ProblemCode.BAD_DATA, category=Category.DATA, item=str(name),
                message=f"{role} column '{name}' is not numeric (dtype {data[name].dtype})",
                hint="recode it to numbers, or use a hot-deck or mode method for it"))
    if problems:
        raise SkipwiseError(problems)
