"""Methods that do not fit an item's type are refused; the plan default is named where it applies."""

from __future__ import annotations

import numpy as np
import pytest

from skipwise.errors import SkipwiseError
from skipwise.impute.fit import fitting_methods, method_misfit
from skipwise.impute.plan import check_plan, load_plan
from skipwise.impute.skipaware import ItemRule, SkipAwareSpec, impute_skipaware
from tests.test_impute_skipaware import Q, make_data

# Pairing of methods and measurement levels: van Buuren (2018), Flexible Imputation of Missing
# Data, 2nd ed., sec. 3.4 (numeric models) and 6.2 (logistic / multinomial for categories).
NUMERIC_ONLY = ("regression", "mean", "median")
CATEGORICAL_ONLY = ("logistic", "multinomial")


@pytest.mark.parametrize("method", NUMERIC_ONLY)
def test_numeric_methods_refused_for_categorical_items(method):
    sat = Q.item("sat")  # three categories
    msg = method_misfit(sat, method)
    assert msg is not None and f"'{method}'" in msg and "'sat'" in msg
    assert "methods that fit: hotdeck, nearest, pmm, multinomial, auto, mode" in msg
    spec = SkipAwareSpec(default=ItemRule(method="hotdeck"), items={"sat": ItemRule(method=method)}, m=1, seed=1)
    with pytest.raises(SkipwiseError, match="methods that fit"):
        impute_skipaware(make_data(2, n=60), Q, spec)   # the library refuses too, not only the plan check


@pytest.mark.parametrize("method", CATEGORICAL_ONLY)
def test_categorical_methods_refused_for_numbers(method):
    msg = method_misfit(Q.item("hours"), method)
    assert msg is not None and "number item 'hours'" in msg and "mean" in msg


def test_every_method_fits_or_is_refused():
    # every method is either fitting or refused for each type, never silently replaced
    for name in ("age", "employed", "hours", "sat"):
        item = Q.item(name)
        fits = fitting_methods(item)
        for m in ("hotdeck", "nearest", "pmm", "regression", "logistic", "multinomial", "auto", "mode",
                  "median", "mean"):
            assert (method_misfit(item, m) is None) == (m in fits)
    assert "logistic" in fitting_methods(Q.item("employed"))      # two values
    assert "logistic" not in fitting_methods(Q.item("sat"))       # three values


def test_plan_names_the_fitting_methods_for_the_default(tmp_path):
    plan = load_plan(text="imputations: 1\ndefault: {method: median}\nitems:\n  age: pmm\n")
    with pytest.raises(SkipwiseError) as err:
        check_plan(plan, Q, ["id", "region"])
    text = err.value.render()
    assert "'employed'" in text and "'sat'" in text and "methods that fit" in text
    assert "give the item its own method under items:" in text


def test_categorical_item_on_the_plan_default_is_reported():
    spec = SkipAwareSpec(default=ItemRule(method="hotdeck", classes=("region",)),
                         items={"age": ItemRule(method="pmm")}, m=1, seed=4)
    res = impute_skipaware(make_data(3, n=120), Q, spec)
    assert res.table.loc["age", "rule"] == "items"
    assert res.table.loc["sat", "rule"] == "plan default" and res.table.loc["sat", "method"] == "hotdeck"
    assert any(n.startswith("sat: categorical item filled by the plan default (hotdeck)") for n in res.notes)
    assert not any(n.startswith("age: categorical") or n.startswith("hours: categorical") for n in res.notes)
    # the drawn values of sat are declared categories only
    filled = res.datasets[0].loc[res.imputed[0]["sat"], "sat"]
    assert len(filled) > 0 and set(np.unique(filled)) <= {1.0, 2.0, 3.0}
