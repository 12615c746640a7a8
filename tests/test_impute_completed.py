"""Completed files classify with no new item nonresponse and no new fault, in every structure.

Each completed dataset is classified again from scratch (not trusted from the imputation's own
record) and compared with the input's classification; the routing of the demo's work section
is also checked directly with pandas from the questionnaire's `asked_if` text.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from skipwise.classify import classify
from skipwise.classify import statuses as S
from skipwise.impute.skipaware import ItemRule, SkipAwareSpec, impute_skipaware
from skipwise.io import read_survey
from skipwise.questionnaire import load_questionnaire, loads_questionnaire


def _new(before: pd.DataFrame, after: pd.DataFrame, q) -> tuple[pd.Series, pd.Series]:
    nonresp = (*q.nonresponse_reasons, S.ITEM_MISSING)
    new_nr = (after.isin(nonresp) & ~before.isin(nonresp)).sum()
    new_fault = (after.isin(S.FAULT_STATUSES) & ~before.isin(S.FAULT_STATUSES)).sum()
    return new_nr[new_nr > 0], new_fault[new_fault > 0]


def test_every_completed_demo_file_classifies_clean(demo_output):
    out, _ = demo_output
    q = load_questionnaire(out / "marrowby-2026.yaml")
    data = read_survey(out / "data" / "marrowby-2026.sav")
    before = classify(data, q).status
    stacked = pd.read_parquet(out / "package" / "marrowby-2026_imputed.parquet")  # pandas' own reader
    ks = sorted(stacked["imputation"].unique())
    assert len(ks) == 3
    for k in ks:
        done = stacked[stacked["imputation"] == k].reset_index(drop=True)[list(data.columns)]
        done = done.astype({c: data[c].dtype for c in data.columns if data[c].dtype.kind in "fi"})
        after = classify(done, q).status
        new_nr, new_fault = _new(before, after, q)
        assert new_nr.empty, f"imputation {k}: new item nonresponse {new_nr.to_dict()}"
        assert new_fault.empty, f"imputation {k}: new faults {new_fault.to_dict()}"
        # the questionnaire's own routing, read with pandas: the work section is asked if age < 75,
        # commute_mode if employed == 1, job_search if employed == 2 (marrowby-2026.yaml)
        asked = (done["age"] < 75) & (data["age"] < 75)
        for item, gate in (("commute_mode", 1), ("job_search", 2)):
            was_open = asked & (data["employed"] == gate)
            now_open = asked & (done["employed"] == gate) & ~was_open
            vals = done.loc[now_open, item]
            assert vals.notna().all() and vals.isin(list(q.item(item).values)).all(), item


QUESTIONNAIRE = """
format: 1
survey: {name: tolland-structures, case_id: id}
codes:
  - {value: -9, reason: refused, kind: nonresponse}
breakoff: {min_run: 99}
sections:
  - name: main
    items:
      - {name: travels, type: categorical, values: {1: "Yes", 2: "No"}}
      - {name: modes, type: multi, options: {bus: Bus, rail: Rail}, asked_if: travels == 1}
      - {name: bus_rating, type: integer, range: [1, 5], asked_if: modes_bus == 1}
      - {name: why_not, type: text, asked_if: travels == 2}
      - {name: hh_size, type: integer, range: [1, 3]}
  - name: members
    roster: {count: hh_size, max: 3, column: "{item}_{n}"}
    items:
      - {name: m_note, type: text}
"""


def _structures(n: int = 300, seed: int = 8) -> pd.DataFrame:
    # invented data obeying the routing, then the two gates refused in some cases
    rng = np.random.default_rng(seed)
    travels = rng.choice([1.0, 2.0], n)
    bus = np.where(travels == 1, rng.choice([0.0, 1.0], n), np.nan)
    rail = np.where(travels == 1, rng.choice([0.0, 1.0], n), np.nan)
    rating = np.where(bus == 1, rng.integers(1, 6, n), np.nan)
    why = np.where(travels == 2, rng.choice(["cost", "health", "none"], n), None)
    hh = rng.integers(1, 4, n).astype(float)
    df = pd.DataFrame({"id": np.arange(n), "travels": travels, "modes_bus": bus, "modes_rail": rail,
                       "bus_rating": rating, "why_not": pd.Series(why, dtype=object), "hh_size": hh})
    for k in (1, 2, 3):
        df[f"m_note_{k}"] = pd.Series(np.where(hh >= k, "ok", None), dtype=object)
    gone = rng.random(n) < 0.15
    df.loc[gone, "travels"] = -9.0
    df.loc[gone, ["modes_bus", "modes_rail", "bus_rating"]] = np.nan
    df.loc[gone, "why_not"] = None
    lost = rng.random(n) < 0.1
    df.loc[lost, "hh_size"] = -9.0
    for k in (1, 2, 3):
        df.loc[lost, f"m_note_{k}"] = None
    return df


@pytest.mark.parametrize("method", ["hotdeck", "auto"])
def test_sets_text_and_rosters_opened_by_an_imputed_gate_are_filled(method):
    q = loads_questionnaire(QUESTIONNAIRE)
    data = _structures()
    spec = SkipAwareSpec(default=ItemRule(method=method), only=None, m=2, seed=5) if False else \
        SkipAwareSpec(default=ItemRule(method=method), include=("travels", "bus_rating", "hh_size"), m=2, seed=5)
    res = impute_skipaware(data, q, spec)
    before = classify(data, q).status
    for d, imp in zip(res.datasets, res.imputed):
        after = classify(d, q).status
        new_nr, new_fault = _new(before, after, q)
        assert new_nr.empty and new_fault.empty, (new_nr.to_dict(), new_fault.to_dict())
        # plain pandas: a case imputed into travels == 1 has its set answered (0/1 in every option)
        opened = imp["travels"] & (d["travels"] == 1)
        assert opened.any() and d.loc[opened, ["modes_bus", "modes_rail"]].isin([0.0, 1.0]).all().all()
        assert "modes" in imp.columns and imp.loc[opened, "modes"].all()
    assert {"modes", "why_not", "m_note_1"} <= set(res.imputed[0].columns)
