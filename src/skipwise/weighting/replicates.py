"""Replicate weights (jackknife, Rao–Wu bootstrap) and replicate standard errors.

Each replicate multiplies the base weights by its factors and re-runs the whole
weighting chain (:func:`skipwise.weighting.pipeline.run_chain`), so the
variance reflects every adjustment and calibration step.  Without ``fraction``
the variances are with-replacement variances (no finite population correction);
with the strata's sampling fractions f_h they carry the correction (1 − f_h):
the jackknife through its coefficients, the bootstrap through Rao & Wu's
rescaling factor λ_h = √(1 − f_h).
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass
from typing import Callable

import numpy as np
import pandas as pd

from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError, did_you_mean
from skipwise.weighting.margins import category_label
from skipwise.weighting.pipeline import Prepared, Structure, run_chain

__all__ = ["ReplicateDesign", "jackknife_design", "bootstrap_design", "jackknife_units", "bootstrap_units",
           "stratum_fractions", "unit_check_problems", "replicate_variance",
           "run_replicates", "weighted_estimates", "replicate_standard_errors", "MAX_REPLICATES"]

#: Largest number of replicates built (memory: cases × replicates floats).
MAX_REPLICATES = 5000


@dataclass(frozen=True, kw_only=True)
class ReplicateDesign:
    """Base-weight factors of every replicate and the variance formula's coefficients.

    ``factors`` has one row per case and one column per replicate; the variance
    is ``Σ_r coef_r (θ_r − θ̄_{group_r})²`` where θ̄ is the mean of the
    replicates in the same ``group`` (the stratum for JKn, all for JK1 and the
    bootstrap).
    """

    method: str
    factors: np.ndarray
    coef: np.ndarray
    group: np.ndarray
    fpc: bool = False
    unit_factors: np.ndarray | None = None   # PSU x replicate (the cases' factors are its rows by PSU)

    @property
    def count(self) -> int:
        return self.factors.shape[1]

    def describe(self) -> tuple[str, ...]:
        """Method, replicate factors and variance formula in words (rendered by the workbook and codebook)."""
        fpc = ("with the finite population correction (1 − f_h) from the strata's sampling fractions"
               if self.fpc else "no finite population correction (with-replacement variance; `fpc: true` "
               "applies one when the sampling fractions are known)")
        if self.method in ("JK1", "JKn"):
            where = "in its stratum h" if self.method == "JKn" else "(one stratum)"
            return (f"{self.method} delete-one-PSU jackknife, {self.count} replicates: replicate (h, j) gives PSU j "
                    f"weight 0 and multiplies the other PSUs {where} by n_h/(n_h − 1); every weighting step is "
                    "re-run in each replicate.",
                    "Variance: Σ_h (1 − f_h)(n_h − 1)/n_h Σ_j (θ_hj − θ̄_h)².", f"Variance: {fpc}.")
        return (f"Rao–Wu rescaling bootstrap, {self.count} replicates, n_h − 1 PSUs drawn with replacement per "
                "stratum: factor 1 − λ_h + λ_h n_h/(n_h − 1) m*_hi, m*_hi the times PSU i was drawn, "
                "λ_h = √(1 − f_h); every weighting step is re-run in each replicate.",
                "Variance: 1/R Σ_r (θ_r − θ̄)².", f"Variance: {fpc}.")


def unit_check_problems(frame: pd.DataFrame, psu: str | None, strata: str | None) -> list[Problem]:
    """PSU and stratum columns that are absent or have missing values (row-local)."""
    problems = []
    for col, what in ((psu, "PSU"), (strata, "stratum")):
        if col is not None and col not in frame.columns:
            problems.append(Problem(code=ProblemCode.MISSING_COLUMN, category=Category.DATA, item=col,
                                    message=f"{what} column '{col}' is not in the data",
                                    hint=did_you_mean(col, map(str, frame.columns))))
        elif col is not None and frame[col].isna().any():
            problems.append(Problem(code=ProblemCode.BAD_DATA, category=Category.DATA, item=col,
                                    message=f"{int(frame[col].isna().sum())} case(s) have no {what}"))
    return problems


def _units(frame: pd.DataFrame, psu: str | None, strata: str | None) -> tuple[np.ndarray, np.ndarray]:
    problems = unit_check_problems(frame, psu, strata)
    if problems:
        raise SkipwiseError(problems)
    n = len(frame)
    stratum = np.zeros(n, dtype=np.intp) if strata is None else pd.factorize(frame[strata], sort=True)[0]
    if psu is None:
        unit = np.arange(n)
    else:
        # PSU labels are nested in strata: the same label in two strata is two PSUs
        unit = pd.MultiIndex.from_arrays([stratum, frame[psu].to_numpy()]).factorize()[0] if strata \
            else pd.factorize(frame[psu], sort=True)[0]
    return unit.astype(np.intp), stratum.astype(np.intp)


def _psu_strata(unit: np.ndarray, stratum: np.ndarray) -> np.ndarray:
    n_units = int(unit.max()) + 1
    of_unit = np.zeros(n_units, dtype=np.intp)
    of_unit[unit] = stratum
    return of_unit


def _check_count(r: int) -> None:
    if r > MAX_REPLICATES:
        raise SkipwiseError(Problem(code=ProblemCode.BAD_VALUE, item="replicates",
                                    message=f"{r:,} replicates requested (more than {MAX_REPLICATES:,})",
                                    hint="name a PSU column that groups cases, or use the bootstrap"))


def _fractions(fraction: np.ndarray | None, stratum: np.ndarray, n_strata: int, what: str) -> np.ndarray:
    """Sampling fraction f_h of each stratum (0 where none is given); one value per stratum, 0 ≤ f_h < 1."""
    if fraction is None:
        return np.zeros(n_strata)
    f = np.asarray(fraction, dtype=float)
    bad = int((np.isnan(f) | (f < 0) | (f >= 1)).sum())
    lo = np.full(n_strata, np.inf)
    hi = np.full(n_strata, -np.inf)
    if not bad:
        np.minimum.at(lo, stratum, f)
        np.maximum.at(hi, stratum, f)
    return stratum_fractions(lo, hi, bad, what)


def stratum_fractions(lo: np.ndarray, hi: np.ndarray, bad: int, what: str = "fraction") -> np.ndarray:
    """f_h from each stratum's smallest and largest fraction (``bad``: cases outside [0, 1))."""
    problems = []
    if bad:
        problems.append(Problem(code=ProblemCode.BAD_DATA, category=Category.DATA, item=what,
                                message="sampling fractions must lie in [0, 1) for every case",
                                hint="give each stratum's share of its units that was sampled"))
    elif (hi - lo > 1e-12 * np.maximum(hi, 1)).any():
        problems.append(Problem(code=ProblemCode.BAD_DATA, category=Category.DATA, item=what,
                                message=f"{int((hi - lo > 1e-12).sum())} stratum(s) have more than one "
                                        "sampling fraction",
                                hint="the finite population correction needs one fraction per stratum"))
    else:
        return hi
    raise SkipwiseError(problems)


def jackknife_design(frame: pd.DataFrame, psu: str | None = None, strata: str | None = None, *,
                     fraction: np.ndarray | None = None) -> ReplicateDesign:
    """Delete-one-PSU jackknife: JK1 without strata, JKn with strata.

    Replicate (h, j) sets the weights of PSU j to 0 and multiplies the other PSUs
    of stratum h by ``n_h/(n_h−1)``.  Without a PSU column each case is its own PSU.
    The variance is ``Σ_h (1 − f_h)(n_h−1)/n_h Σ_j (θ_hj − θ̄_h)²``, with f_h the
    stratum's sampling fraction (per case in ``fraction``; default 0, no finite
    population correction).  For the mean of a simple random sample without
    replacement, JK1 then gives ``(1 − n/N) s²/n`` (Cochran 1977, sec. 2.5); JKn
    gives the stratified formula ``Σ_h W_h² (1 − f_h) s_h²/n_h`` (sec. 5.3).

    References
    ----------
    Quenouille, M. H. (1956). Notes on bias in estimation. *Biometrika* 43, 353–360.
    Wolter, K. M. (2007). *Introduction to Variance Estimation*, 2nd ed., ch. 4. Springer.
    Cochran, W. G. (1977). *Sampling Techniques*, 3rd ed. Wiley.
    """
    unit, stratum = _units(frame, psu, strata)
    of_unit = _psu_strata(unit, stratum)
    f_h = _fractions(fraction, stratum, int(stratum.max()) + 1 if len(stratum) else 1, "fraction")
    design = jackknife_units(of_unit, f_h, stratified=strata is not None, item=strata or psu,
                             fpc=fraction is not None)
    return dataclasses.replace(design, factors=design.unit_factors[unit])


def jackknife_units(of_unit: np.ndarray, f_h: np.ndarray, *, stratified: bool, item: str | None = None,
                    fpc: bool = False) -> ReplicateDesign:
    """The jackknife's PSU x replicate factor table (``of_unit``: each PSU's stratum); ``factors``
    is left empty (the cases' factors are ``unit_factors[unit]``)."""
    n_units = len(of_unit)
    _check_count(n_units)
    n_h = np.bincount(of_unit)
    if (n_h < 2).any():
        bad = np.flatnonzero(n_h < 2)
        raise SkipwiseError(Problem(code=ProblemCode.INFEASIBLE, category=Category.DATA, item=item,
                                    message=f"{len(bad)} stratum(s) have a single PSU; the jackknife needs two",
                                    hint="collapse single-PSU strata with a neighbouring stratum"))
    # unit-by-replicate factor matrix: replicate r deletes unit r
    same = of_unit[:, None] == of_unit[None, :]
    f_units = np.where(same, (n_h / (n_h - 1.0))[of_unit][None, :], 1.0)
    np.fill_diagonal(f_units, 0.0)
    coef = ((1.0 - f_h) * (n_h - 1.0) / n_h)[of_unit]
    return ReplicateDesign(method="JKn" if stratified else "JK1", factors=np.zeros((0, n_units)), coef=coef,
                           group=of_unit if stratified else np.zeros(n_units, dtype=np.intp), fpc=fpc,
                           unit_factors=f_units)


def bootstrap_design(frame: pd.DataFrame, psu: str | None = None, strata: str | None = None, *,
                     count: int = 200, seed: int = 12345, fraction: np.ndarray | None = None) -> ReplicateDesign:
    """Rao–Wu rescaling bootstrap with ``m_h = n_h − 1`` PSUs drawn per stratum.

    Replicate factor of PSU i in stratum h: ``1 − λ_h + λ_h (n_h/(n_h−1)) m*_hi``, with
    m*_hi the times PSU i was drawn and ``λ_h = √(m_h (1 − f_h)/(n_h − 1)) = √(1 − f_h)``
    (f_h the stratum's sampling fraction, per case in ``fraction``; default 0, when the
    factor is ``(n_h/(n_h−1)) m*_hi``).  Variance ``1/R Σ_r (θ_r − θ̄)²``.

    References
    ----------
    Rao, J. N. K. & Wu, C. F. J. (1988). Resampling inference with complex survey
    data. *JASA* 83(401), 231–241.
    Rao, J. N. K., Wu, C. F. J. & Yue, K. (1992). Some recent work on resampling
    methods for complex surveys. *Survey Methodology* 18(2), 209–217.
    """
    _check_count(count)
    unit, stratum = _units(frame, psu, strata)
    of_unit = _psu_strata(unit, stratum)
    n_strata = int(of_unit.max()) + 1 if len(of_unit) else 1
    f_h = _fractions(fraction, stratum, n_strata, "fraction")
    design = bootstrap_units(of_unit, f_h, count=count, seed=seed, item=strata or psu, fpc=fraction is not None)
    return dataclasses.replace(design, factors=design.unit_factors[unit])


def bootstrap_units(of_unit: np.ndarray, f_h: np.ndarray, *, count: int, seed: int, item: str | None = None,
                    fpc: bool = False) -> ReplicateDesign:
    """The Rao–Wu bootstrap's PSU x replicate factor table, drawn with ``numpy.random.default_rng(seed)``
    stratum by stratum; ``factors`` is left empty (the cases' factors are ``unit_factors[unit]``)."""
    _check_count(count)
    n_h = np.bincount(of_unit)
    if (n_h < 2).any():
        raise SkipwiseError(Problem(code=ProblemCode.INFEASIBLE, category=Category.DATA, item=item,
                                    message="a stratum has a single PSU; the bootstrap needs two",
                                    hint="collapse single-PSU strata with a neighbouring stratum"))
    lam = np.sqrt(1.0 - f_h[:len(n_h)])
    rng = np.random.default_rng(seed)
    f_units = np.zeros((len(of_unit), count))
    for h, nh in enumerate(n_h):  # loop over strata, not cases
        members = np.flatnonzero(of_unit == h)
        draws = rng.integers(0, nh, size=(count, nh - 1))
        counts = np.zeros((count, nh))
        np.add.at(counts, (np.repeat(np.arange(count), nh - 1), draws.ravel()), 1.0)
        f_units[members] = (1.0 - lam[h] + lam[h] * counts * (nh / (nh - 1.0))).T
    return ReplicateDesign(method="bootstrap", factors=np.zeros((0, count)), coef=np.full(count, 1.0 / count),
                           group=np.zeros(count, dtype=np.intp), fpc=fpc, unit_factors=f_units)


def replicate_variance(theta_r: np.ndarray, design: ReplicateDesign) -> np.ndarray:
    """Replicate variance of each column of ``theta_r`` (replicates × estimates)."""
    theta = np.asarray(theta_r, dtype=float)
    flat = theta.reshape(theta.shape[0], -1)
    var = np.zeros(flat.shape[1])
    for g in np.unique(design.group):  # loop over strata (JKn) or once
        sel = design.group == g
        dev = flat[sel] - flat[sel].mean(axis=0)
        var += np.sum(design.coef[sel][:, None] * dev * dev, axis=0)
    return var.reshape(theta.shape[1:])


def run_replicates(prep: Prepared, design: ReplicateDesign, structure: Structure | None = None,
                   progress: Callable[[int], None] | None = None) -> np.ndarray:
    """Final weights of every replicate (cases × replicates), re-running the whole chain."""
    out = np.empty(design.factors.shape)
    for r in range(design.count):
        try:
            out[:, r] = run_chain(prep, prep.base * design.factors[:, r], structure=structure, detail=False).final
        except SkipwiseError as err:
            raise SkipwiseError(err.problems, headline=f"replicate {r + 1} of {design.count} ({design.method}) "
                                                       f"failed; collapse classes or categories") from None
        if progress is not None:
            progress(r + 1)
    return out


def _label_codes(col: pd.Series) -> tuple[np.ndarray, list[str]]:
    """Per-case index into the column's distinct category labels (-1 where missing).

    Labels are computed once per distinct value, not once per case; values that
    share a label (``1`` and ``1.0``) share a code.
    """
    raw, uniques = pd.factorize(col, use_na_sentinel=True)
    lab_codes, labels = pd.factorize(pd.Series([category_label(u) for u in uniques], dtype=object))
    lookup = np.append(lab_codes.astype(np.intp), -1)  # raw code -1 (missing) maps to -1
    return lookup[raw], [str(x) for x in labels]


def _estimate_columns(frame: pd.DataFrame, respondent: np.ndarray, means: tuple[str, ...],
                      proportions: tuple[str, ...], exclude: tuple) -> tuple[list[dict], np.ndarray, np.ndarray]:
    excl = {category_label(v) for v in exclude}
    rows, ys, valids = [], [], []
    problems = []
    for name in (*means, *proportions):
        if name not in frame.columns:
            problems.append(Problem(code=ProblemCode.MISSING_COLUMN, item=name,
                                    message=f"estimate variable '{name}' is not in the data",
                                    hint=did_you_mean(name, map(str, frame.columns))))
    if problems:
        raise SkipwiseError(problems)
    for name in means:
        col = pd.to_numeric(frame[name], errors="coerce")
        codes, labels = _label_codes(col)
        keep = np.array([lab not in excl for lab in labels] + [False], dtype=bool)  # last: code -1
        valid = respondent & (codes >= 0) & keep[codes]
        rows.append({"variable": name, "category": "", "kind": "mean"})
        ys.append(np.where(valid, col.fillna(0).to_numpy(dtype=float), 0.0))
        valids.append(valid)
    for name in proportions:
        codes, labels = _label_codes(frame[name])
        keep = np.array([lab not in excl for lab in labels] + [False], dtype=bool)  # last: code -1
        valid = respondent & (codes >= 0) & keep[codes]
        present = np.unique(codes[valid])
        for i in sorted(present, key=lambda k: labels[k]):
            rows.append({"variable": name, "category": labels[i], "kind": "proportion"})
            ys.append((valid & (codes == i)).astype(float))
            valids.append(valid)
    return rows, np.column_stack(ys) if ys else np.zeros((len(frame), 0)), \
        np.column_stack(valids) if valids else np.zeros((len(frame), 0), dtype=bool)


def weighted_estimates(y: np.ndarray, valid: np.ndarray, w: np.ndarray) -> np.ndarray:
    """Weighted means ``Σ w y / Σ w`` over valid cases; w may be a (cases × replicates) matrix."""
    v = valid.astype(float)
    if w.ndim == 1:
        return (w @ (y * v)) / (w @ v)
    return ((y * v).T @ w / (v.T @ w)).T


def replicate_standard_errors(frame: pd.DataFrame, respondent: np.ndarray, final: np.ndarray,
                              replicates: np.ndarray, design: ReplicateDesign, *, means: tuple[str, ...] = (),
                              proportions: tuple[str, ...] = (), exclude_values: tuple = ()) -> pd.DataFrame:
    """Weighted means and proportions with replicate standard errors.

    Cases with a missing value or a value in ``exclude_values`` (special codes)
    are left out of each item's estimate.
    """
    rows, y, valid = _estimate_columns(frame, respondent, means, proportions, exclude_values)
    if not rows:
        return pd.DataFrame(columns=["variable", "category", "kind", "n", "estimate", "se", "replicates", "method"])
    est = weighted_estimates(y, valid, final)
    theta = weighted_estimates(y, valid, replicates)
    se = np.sqrt(replicate_variance(theta, design))
    table = pd.DataFrame(rows)
    table["n"] = (valid & (final > 0)[:, None]).sum(axis=0)
    table["estimate"] = est
    table["se"] = se
    table["replicates"] = design.count
    table["method"] = design.method
    return table
