"""Weighting plan file and the chain (invented demo data; property checks + closed forms)."""

from __future__ import annotations

import textwrap

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose

from skipwise.errors import ProblemCode, SkipwiseError
from skipwise.weighting.plan import load_plan
from skipwise.weighting.pipeline import chain_weights, outcome_categories, prepare, run_chain

PLAN = """\
format: 1
case_id: rid
dispositions:
  column: dispo
  categories:
    I: [110]
    P: [120]
    R: [210]
    NC: [220]
    O: [230]
    UH: [310]
    UO: [390]
    NE: [410]
base:
  probability: p_sel
eligibility:
  classes: [region]
nonresponse:
  method: classes
  classes: [region, agegrp]
  min_respondents: 20
  max_factor: 3.0
calibration:
  method: rake
  margins:
    region: {north: 6000, south: 4000}
    agegrp: {young: 3000, mid: 4000, old: 3000}
trimming:
  median_multiple: 3.5
replicates:
  method: jackknife
  psu: psu
  strata: stratum
estimates:
  means: [score]
  proportions: [owns_car]
  exclude_values: [-9]
"""


def make_frame(n: int = 1200, seed: int = 5) -> pd.DataFrame:
    """Invented survey frame: dispositions, selection probabilities, PSUs (demo data)."""
    rng = np.random.default_rng(seed)
    region = rng.choice(["north", "south"], n, p=[0.55, 0.45])
    agegrp = rng.choice(["young", "mid", "old"], n)
    dispo = rng.choice([110, 120, 210, 220, 230, 310, 390, 410], n,
                       p=[0.45, 0.05, 0.15, 0.1, 0.03, 0.07, 0.05, 0.1])
    stratum = np.where(region == "north", 1, 2)
    psu = rng.integers(0, 10, n)
    return pd.DataFrame({
        "rid": np.arange(1, n + 1), "dispo": dispo, "region": region, "agegrp": agegrp,
        "p_sel": rng.uniform(0.05, 0.2, n), "stratum": stratum, "psu": psu,
        "score": np.where(rng.uniform(size=n) < 0.05, -9, rng.normal(50, 10, n).round(1)),
        "owns_car": rng.choice([1, 2], n),
    })


def test_plan_loads_with_lines():
    plan = load_plan(text=PLAN)
    assert plan.dispositions.codes["110"] == "I"
    assert plan.calibration.method == "rake" and plan.line("calibration", "margins", "region") == 26
    assert plan.nonresponse.max_factor == 3.0 and plan.trimming.median_multiple == 3.5


def test_plan_problems_all_reported_with_lines_and_hints():
    bad = PLAN.replace("  method: rake", "  methd: rake").replace("min_respondents: 20", "min_respondents: -3")
    bad = bad.replace("north: 6000", "north: 6001")
    with pytest.raises(SkipwiseError) as info:
        load_plan(text=bad)
    rows = {(r["code"], r["line"]) for r in info.value.to_rows()}
    assert ("unknown-key", 24) in rows and ("bad-value", 21) in rows and ("bad-value", 25) in rows
    unknown = [p for p in info.value.problems if p.code == ProblemCode.UNKNOWN_KEY][0]
    assert unknown.hint == "did you mean 'method'?"
    with pytest.raises(SkipwiseError) as info:
        load_plan(text="format: 1\ndispositions: [\n")
    assert info.value.codes == [ProblemCode.YAML_SYNTAX]


def test_chain_meets_margins_cap_and_keeps_weight_sum():
    df = make_frame()
    plan = load_plan(text=PLAN)
    prep = prepare(df, plan)
    res = run_chain(prep, prep.base)
    st = res.stages
    # unknown-eligibility step keeps the total base weight among known-eligibility cases
    assert_allclose(st["eligibility"].sum(), st["base"].sum() - _ne_weight(prep, res), rtol=1e-10)
    # nonresponse step keeps the eligible total within classes
    assert_allclose(st["nonresponse"].sum(), st["eligibility"].sum(), rtol=1e-10)
    final = res.final
    assert (final[~prep.respondent] == 0).all() and (final[prep.respondent] > 0).all()
    assert_allclose(final.sum(), 10000, rtol=1e-9)
    by_region = pd.Series(final).groupby(df["region"].to_numpy()).sum()
    assert_allclose(by_region[["north", "south"]].to_numpy(), [6000, 4000], rtol=1e-8)
    assert final[prep.respondent].max() <= res.trimming.cap * (1 + 1e-6)
    assert res.margins is not None and res.margins["difference"].abs().max() < 1e-6


def _ne_weight(prep, res):
    # Weight that the eligibility step handed to not-eligible cases and then dropped, by hand
    # with pandas (weighting-class adjustment, Raghunathan 2015 [seen]): within each eligibility
    # class the unknown-eligibility cases' weight goes to the known cases in proportion to their
    # weight, factor Σ_{known+unknown} d / Σ_known d; the NE cases' share is then dropped.
    d = pd.Series(res.stages["base"])
    outcome = prep.outcome.to_numpy()
    unknown = np.isin(outcome, ["UH", "UO"])
    known = ~unknown
    cls = prep.frame["region"].to_numpy()  # the plan's eligibility classes: [region]
    factor = d.groupby(cls).sum() / d[known].groupby(cls[known]).sum()
    ne = outcome == "NE"
    return float((d[ne] * factor.loc[cls[ne]].to_numpy()).sum())


def test_chain_is_a_function_of_base_weights():
    df = make_frame(400)
    plan = load_plan(text=PLAN)
    w1 = chain_weights(df, plan)
    w2 = chain_weights(df, plan, base=1.0 / df["p_sel"].to_numpy())
    assert_allclose(w1, w2)


def test_poststratification_plan_equals_closed_form():
    # Deville & Särndal (1992) [memory]: one categorical variable -> w = d N_h / N_h_hat
    df = make_frame(500)
    text = PLAN.split("eligibility:")[0] + textwrap.dedent("""\
        calibration:
          method: poststratify
          margins:
            region: {north: 600, south: 400}
        """)
    w = chain_weights(df, load_plan(text=text))
    resp = df["dispo"].isin([110, 120]).to_numpy()
    d = 1 / df["p_sel"].to_numpy()
    dr = pd.Series(np.where(resp, d, 0.0))
    sums = dr.groupby(df["region"].to_numpy()).transform("sum").to_numpy()
    target = df["region"].map({"north": 600, "south": 400}).to_numpy()
    assert_allclose(w, np.where(resp, d * target / sums, 0.0), rtol=1e-12)


def test_share_answered_splits_interviews():
    df = pd.DataFrame({"dispo": [110, 110, 110, 220], "rid": [1, 2, 3, 4]})
    plan = load_plan(text="format: 1\ndispositions:\n  column: dispo\n  categories: {I: [110], NC: [220]}\n"
                          "  interview_split: {breakoff_below: 0.5, complete_above: 0.8}\n")
    share = pd.Series([0.9, 0.6, 0.2, 0.0])
    # AAPOR example cut-points [memory]: >80% complete, 50-80% partial, <50% break-off (counted in R)
    assert outcome_categories(df, plan, share).tolist() == ["I", "P", "R", "NC"]
    with pytest.raises(SkipwiseError) as info:
        outcome_categories(df, plan, None)
    assert info.value.codes == [ProblemCode.MISSING_KEY]


@pytest.mark.parametrize(
    ("change", "code"),
    [
        (lambda df: df.assign(p_sel=np.where(df["rid"] <= 3, 0.0, df["p_sel"])), ProblemCode.BAD_WEIGHTS),
        (lambda df: df.assign(dispo=np.where(df["rid"] == 5, 999, df["dispo"])), ProblemCode.UNDECLARED_VALUE),
        (lambda df: df.assign(region=np.where(df["rid"] == df.loc[df["dispo"] == 110, "rid"].iloc[0], "east",
                                              df["region"])), ProblemCode.UNDECLARED_VALUE),
        (lambda df: df.drop(columns=["agegrp"]), ProblemCode.MISSING_COLUMN),
    ],
    ids=["zero-probability", "unmapped-disposition", "untargeted-category", "missing-class-column"],
)
def test_chain_errors(change, code):
    df = change(make_frame(300))
    with pytest.raises(SkipwiseError) as info:
        prepare(df, load_plan(text=PLAN))
    assert code in info.value.codes


def test_bad_weights_message_names_cases():
    df = make_frame(300)
    df.loc[df["rid"].isin([4, 9]), "p_sel"] = -1
    with pytest.raises(SkipwiseError) as info:
        prepare(df, load_plan(text=PLAN))
    assert "2 case(s)" in str(info.value) and "[4, 9]" in str(info.value)


def _replace_section(text: str, start: str, new: str) -> str:
    head, rest = text.split(start, 1)
    tail = rest.split("\n", 1)[1]
    # drop the old section's indented lines
    lines = tail.splitlines(keepends=True)
    while lines and lines[0].startswith("  "):
        lines.pop(0)
    return head + new + "".join(lines)


@pytest.mark.parametrize("use", ["inverse", "classes"], ids=["inverse-propensity", "propensity-classes"])
def test_propensity_nonresponse_step(use):
    import statsmodels.api as sm

    df = make_frame(800)
    text = _replace_section(PLAN, "nonresponse:", f"nonresponse:\n  method: propensity\n  covariates: [region, agegrp]\n"
                                                  f"  propensity_use: {use}\n  min_respondents: 10\n")
    text = text.split("calibration:")[0]
    prep = prepare(df, load_plan(text=text))
    res = run_chain(prep, prep.base)
    elig = prep.eligible
    # Reference: statsmodels Logit called directly on the eligible cases
    x = pd.get_dummies(df.loc[elig, ["region", "agegrp"]], drop_first=True, dtype=float)
    direct = sm.Logit(prep.respondent[elig].astype(float), sm.add_constant(x)).fit(disp=0)
    assert_allclose(np.sort(res.propensity.params.to_numpy()), np.sort(direct.params.to_numpy()), rtol=1e-8)
    w = res.stages["nonresponse"]
    if use == "inverse":
        p = direct.predict()
        expect = np.where(prep.respondent[elig], res.stages["eligibility"][elig] / p, 0.0)
        assert_allclose(w[elig], expect, rtol=1e-8)
    else:
        # weighting-class adjustment within propensity classes keeps the eligible total
        assert_allclose(w.sum(), res.stages["eligibility"].sum(), rtol=1e-10)
        assert res.class_tables[-1]["class"].str.startswith("propensity").all()


@pytest.mark.parametrize("method", ["linear", "logit"])
def test_linear_and_logit_calibration_in_chain(method):
    df = make_frame(800)
    text = PLAN.replace("  method: rake", f"  method: {method}\n  bounds: [0.3, 3.0]").split("trimming:")[0]
    prep = prepare(df, load_plan(text=text))
    res = run_chain(prep, prep.base)
    assert_allclose(res.margins["achieved"], res.margins["target"], rtol=1e-8)
    if method == "logit":
        g = res.stages["calibrated"][prep.respondent] / res.stages["nonresponse"][prep.respondent]
        assert g.min() > 0.3 and g.max() < 3.0


def test_bootstrap_plan_runs_whole_chain():
    from skipwise.weighting.weigh import weigh

    df = make_frame(500)
    text = PLAN.replace("  method: jackknife", "  method: bootstrap\n  count: 30\n  seed: 7")
    res = weigh(df, load_plan(text=text))
    assert res.design.method == "bootstrap" and res.replicates.shape == (500, 30)
    # every replicate was re-raked: region margins hold in each
    sums = pd.DataFrame(res.replicates).groupby(df["region"].to_numpy()).sum()
    assert_allclose(sums.loc["north"].to_numpy(), 6000, rtol=1e-6)
    assert set(res.estimates["variable"]) == {"score", "owns_car"}
    assert (res.estimates["se"] > 0).all()


def test_propensity_replicates_refit_with_resampling_factors():
    from skipwise.weighting.replicates import jackknife_design, run_replicates

    df = make_frame(300)
    text = _replace_section(PLAN, "nonresponse:", "nonresponse:\n  method: propensity\n  covariates: [region]\n")
    prep = prepare(df, load_plan(text=text.split("calibration:")[0]))
    full = run_chain(prep, prep.base)
    design = jackknife_design(df, "psu", "stratum")
    reps = run_replicates(prep, design, structure=full.structure)
    # a saturated (region-only) logit fitted with frequency weights f gives, in each region, the
    # f-weighted response share: p = Σ_resp f / Σ_elig f (closed form of the logit ML equations)
    f = design.factors[:, 0]
    rep0 = run_chain(prep, prep.base * f, structure=full.structure)
    elig = prep.eligible
    by = pd.DataFrame({"r": df["region"][elig], "f": f[elig], "fr": f[elig] * prep.respondent[elig]})
    share = by.groupby("r")["fr"].transform("sum") / by.groupby("r")["f"].transform("sum")
    assert_allclose(rep0.propensity.propensity, share.to_numpy(), rtol=1e-6)
    assert not np.allclose(rep0.propensity.propensity, full.propensity.propensity)
    assert_allclose(reps[:, 0], rep0.final)
