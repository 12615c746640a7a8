"""The public entry points (README, DEVELOPERS.md) are importable from ``skipwise`` with the contract's shapes."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import skipwise


def test_outcome_rates_keys_and_a_worked_value():
    # Exact test vector of REFERENCES.md [computed from the published formulas]: RR1 = 2/5.
    rates = skipwise.outcome_rates({"I": 400, "P": 50, "R": 200, "NC": 150, "O": 20, "UH": 100, "UO": 80, "NE": 230})
    expected = {f"RR{i}" for i in range(1, 7)} | {f"COOP{i}" for i in range(1, 5)} | \
        {f"REF{i}" for i in range(1, 4)} | {f"CON{i}" for i in range(1, 4)}
    assert expected <= set(rates)
    assert rates["RR1"] == pytest.approx(2 / 5)


def test_rake_returns_weights_aligned_with_the_index():
    data = pd.DataFrame({"sex": ["f", "m", "f", "m"], "w0": [1.0, 1.0, 2.0, 2.0]}, index=[10, 11, 12, 13])
    w = skipwise.rake(data, {"sex": {"f": 30.0, "m": 10.0}}, weight="w0")
    assert isinstance(w, pd.Series) and list(w.index) == [10, 11, 12, 13]
    # One margin: raking is post-stratification, w = d * N_h / N̂_h (Deville & Särndal 1992 [memory]).
    np.testing.assert_allclose(w.to_numpy(), [10.0, 10 / 3, 20.0, 20 / 3])


def test_kish_deff_and_little():
    # Kish (1992): weights 40 x 1.5 and 10 x 4 give deff 1.25 (REFERENCES.md [computed]).
    assert skipwise.kish_deff(np.r_[np.full(40, 1.5), np.full(10, 4.0)]) == pytest.approx(1.25)
    rng = np.random.default_rng(3)
    frame = pd.DataFrame(rng.normal(size=(200, 2)), columns=["a", "b"])
    frame.loc[rng.random(200) < 0.2, "b"] = np.nan
    res = skipwise.little_mcar_test(frame)
    assert res.df == 1 and 0 <= res.p_value <= 1 and res.statistic >= 0
    # Two variables, one incomplete: Little (1988) reduces to the two-sample form
    # d² = (ā_obs − ā_mis)² / (σ̂_aa (1/n_obs + 1/n_mis)), σ̂_aa divisor-n [seen, abstract; computed, derived]
    a, miss = frame["a"].to_numpy(), frame["b"].isna().to_numpy()
    d2 = (a[~miss].mean() - a[miss].mean()) ** 2 / (np.var(a) * (1 / (~miss).sum() + 1 / miss.sum()))
    assert res.statistic == pytest.approx(d2, rel=1e-7)


def test_questionnaire_read_and_classify(tmp_path):
    q = skipwise.load_questionnaire("questionnaires/marrowby-2026.yaml")
    assert isinstance(q, skipwise.Questionnaire)
    from skipwise.demo import generate

    data = generate(seed=5, n_addresses=300).interviews
    path = tmp_path / "d.sav"
    skipwise.write_survey(data, path)
    back = skipwise.read_survey(path)
    cl = skipwise.classify(back, q)
    assert isinstance(cl, skipwise.Classification)
    assert list(cl.status.columns) == list(q.item_names) and cl.status.index.equals(back.index)


def test_classify_stays_the_function_after_subpackage_imports():
    import importlib

    importlib.import_module("skipwise.classify.export")
    importlib.import_module("skipwise.classify.result")
    from skipwise import classify

    assert callable(classify) and classify is skipwise.classify
    assert classify.__module__ == "skipwise.classify.engine"
