"""Which imputation methods fit which item types.

A method that does not fit an item is refused, never quietly replaced: a mean of
category codes is not a category, and the drawn value would be thrown away for a
random donor value (a hot-deck under another name).  The rules follow the usual
pairing of models and measurement levels (van Buuren, 2018, *Flexible Imputation
of Missing Data*, 2nd ed., sec. 3.4 and 6.2): linear models, means and medians
for numbers; logistic and multinomial models for categories; donor methods
(hot-deck, nearest donor, predictive mean matching on numeric codes) and the
mode for either.
"""

from __future__ import annotations

from skipwise.questionnaire.model import Item, ItemType

__all__ = ["fitting_methods", "method_misfit"]

_NUMERIC = ("hotdeck", "nearest", "pmm", "regression", "auto", "mode", "median", "mean")
_CATEGORICAL = ("hotdeck", "nearest", "pmm", "logistic", "multinomial", "auto", "mode")
_OTHER = ("hotdeck", "nearest", "mode")


def fitting_methods(item: Item) -> tuple[str, ...]:
    """The imputation methods that fit ``item`` (empty for check-all-that-apply sets)."""
    if item.type is ItemType.MULTI:
        return ()
    if item.type in (ItemType.TEXT, ItemType.DATE):
        return _OTHER
    if item.type is ItemType.CATEGORICAL:
        out = list(_CATEGORICAL)
        if item.values and any(isinstance(k, str) for k in item.values):
            out.remove("pmm")  # pmm matches on numeric codes
        if item.values is not None and len(item.values) != 2:
            out.remove("logistic")
        return tuple(out)
    return _NUMERIC


def method_misfit(item: Item, method: str) -> str | None:
    """Why ``method`` does not fit ``item``, naming the methods that do (None when it fits)."""
    if method == "none":
        return None
    fits = fitting_methods(item)
    if not fits:
        return f"'{item.name}' is a check-all-that-apply set: sets are not imputed; list it under exclude"
    if method in fits:
        return None
    what = item.type.value
    if item.type is ItemType.CATEGORICAL and method == "logistic" and item.values is not None:
        what = f"categorical item with {len(item.values)} values"
    elif item.type is ItemType.CATEGORICAL and method == "pmm":
        what = "categorical item with text codes"
    else:
        what = f"{what} item"
    return f"method '{method}' does not fit the {what} '{item.name}'; methods that fit: {', '.join(fits)}"
