"""Hot-deck imputation: classes, weights, nearest donors, donor limit, collapsing, MCAR bias."""

import numpy as np
import pandas as pd
import pytest
from scipy.spatial.distance import cdist

from skipwise.errors import SkipwiseError
from skipwise.impute.hotdeck import hotdeck


@pytest.fixture(scope="module")
def mcar():
    rng = np.random.default_rng(11)
    n = 20_000
    g = rng.integers(0, 4, n)
    y = 10.0 + 2.0 * g + rng.normal(0, 2, n)
    df = pd.DataFrame({"g": g, "x": y + rng.normal(0, 1, n), "y": y})
    df.loc[rng.random(n) < 0.3, "y"] = np.nan
    return df, y


@pytest.mark.parametrize("kw", [{}, {"classes": ["g"]}, {"classes": ["g"], "covariates": ["x"], "k": 3},
                                {"classes": ["g"], "max_donor_use": 2}],
                         ids=["whole-file", "classes", "nearest", "donor-limit"])
def test_mean_unbiased_under_mcar(mcar, kw):
    # Under MCAR the respondents are a random subsample, so a donor draw has the population
    # distribution (Andridge & Little 2010, sec. 2 [memory]). The full-data mean's SE here is about
    # 0.02; tolerance 0.08 (~4 SE) keeps the seeded test stable.
    df, y = mcar
    res = hotdeck(df, ["y"], seed=5, **kw)
    assert res.data["y"].notna().all()
    assert abs(res.data["y"].mean() - y.mean()) < 0.08


def test_donors_come_from_the_same_class(mcar):
    df, _ = mcar
    res = hotdeck(df, ["y"], classes=["g"], seed=1)
    rec = res.imputed["y"].to_numpy()
    donors = res.donor["y"].to_numpy()[rec]
    assert (df["g"].to_numpy()[donors] == df["g"].to_numpy()[rec]).all()
    assert (res.data["y"].to_numpy()[rec] == df["y"].to_numpy()[donors]).all()


def test_weighted_donor_probability_proportional_to_weight():
    # Two donors with weights 1 and 3: the second should serve 3/4 of the recipients
    # (binomial SE with 4000 draws about 0.007; tolerance 0.03).
    n_rec = 4000
    df = pd.DataFrame({"y": np.r_[1.0, 2.0, np.full(n_rec, np.nan)], "w": np.r_[1.0, 3.0, np.ones(n_rec)]})
    res = hotdeck(df, ["y"], weights="w", seed=3)
    assert abs((res.data["y"].iloc[2:] == 2.0).mean() - 0.75) < 0.03


def test_nearest_donor_is_nearest_within_class():
    # Reference: brute-force Euclidean distances (scipy.spatial.distance.cdist) on the
    # standardized covariates, within each class.
    rng = np.random.default_rng(2)
    n = 300
    df = pd.DataFrame({"c": rng.integers(0, 3, n), "u": rng.normal(size=n), "v": rng.normal(5, 3, n),
                       "y": rng.normal(size=n)})
    df.loc[rng.random(n) < 0.3, "y"] = np.nan
    res = hotdeck(df, ["y"], classes=["c"], covariates=["u", "v"], k=1, seed=0)
    z = df[["u", "v"]].to_numpy()
    z = (z - z.mean(0)) / z.std(0)
    rec = np.flatnonzero(res.imputed["y"])
    for c in range(3):
        r = rec[df["c"].to_numpy()[rec] == c]
        pool = np.flatnonzero(df["y"].notna() & (df["c"] == c))
        d = cdist(z[r], z[pool])
        chosen = res.donor["y"].to_numpy()[r]
        assert np.allclose(d.min(axis=1), np.linalg.norm(z[r] - z[chosen], axis=1))


def test_donor_limit_and_collapse_order():
    # Class (a=1, b=1) has one donor and three recipients; with a limit of 2 the third
    # recipient collapses to class a=1 (the last class variable is dropped first).
    df = pd.DataFrame({"a": [1, 1, 1, 1, 1, 2], "b": [1, 1, 1, 1, 2, 1],
                       "y": [5.0, np.nan, np.nan, np.nan, 7.0, 9.0]})
    res = hotdeck(df, ["y"], classes=["a", "b"], max_donor_use=2, seed=0)
    assert res.data["y"].notna().all()
    assert res.max_uses["y"] <= 2
    assert sorted(res.data["y"].iloc[1:4]) == [5.0, 5.0, 7.0]
    assert [(c.classes, c.n_recipients) for c in res.collapses] == [(("a",), 1)]
    assert any("drew within a" in n for n in res.notes)


def test_limit_never_exceeded_on_larger_data(mcar):
    df, _ = mcar
    res = hotdeck(df.iloc[:3000], ["y"], classes=["g"], max_donor_use=1, seed=9)
    counts = pd.Series(res.donor["y"][res.imputed["y"]]).value_counts()
    assert counts.max() == 1 and res.data["y"].iloc[:3000].notna().all()


def test_no_donor_anywhere_is_reported():
    df = pd.DataFrame({"y": [np.nan, np.nan], "z": [1.0, np.nan]})
    res = hotdeck(df, ["y", "z"], seed=0)
    assert res.unfilled["y"] == 2 and not res.imputed["y"].any() and res.data["z"].iloc[1] == 1.0


def test_same_seed_same_result(mcar):
    df, _ = mcar
    a = hotdeck(df, ["y"], classes=["g"], seed=4).data
    b = hotdeck(df, ["y"], classes=["g"], seed=4).data
    c = hotdeck(df, ["y"], classes=["g"], seed=5).data
    assert a.equals(b) and not a.equals(c)


def test_string_items_keep_their_dtype():
    df = pd.DataFrame({"g": [1, 1, 2], "s": pd.array(["x", None, "y"], dtype="string")})
    out = hotdeck(df, ["s"], classes=["g"], seed=0).data
    assert out["s"].tolist() == ["x", "x", "y"] and out["s"].dtype == df["s"].dtype


def test_bad_options_collected():
    df = pd.DataFrame({"y": [1.0, np.nan], "w": [1.0, 1.0]})
    with pytest.raises(SkipwiseError) as exc:
        hotdeck(df, ["y"], covariates=["w"], weights="w", max_donor_use=0)
    assert len(exc.value.problems) == 2
