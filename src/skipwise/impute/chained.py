"""Multiple imputation by chained equations (fully conditional specification).

Each of the M completed datasets is made by its own chain: start from random
draws of observed values, then for a number of iterations visit every item in
turn and re-impute its missing cells from a model on all other items (current
values) and the covariates, with *proper* draws (the model parameters are
drawn from their approximate posterior before each imputation). Models are
always fitted to the item's observed cases only. The chains' seeds come from
one ``numpy.random.SeedSequence`` (one spawned child per imputation), so one seed fixes all
M datasets, and the chains may run in parallel processes (``workers``) with the same result
whatever the number of processes.

References
----------
van Buuren, S. and Groothuis-Oudshoorn, K. (2011). mice: Multivariate imputation by
chained equations in R. *Journal of Statistical Software* 45(3), 1–67.
Raghunathan, T. E., Lepkowski, J. M., Van Hoewyk, J. and Solenberger, P. (2001). A
multivariate technique for multiply imputing missing values using a sequence of
regression models. *Survey Methodology* 27(1), 85–95.
Rubin, D. B. (1987). *Multiple Imputation for Nonresponse in Surveys*. Wiley.
"""

from __future__ import annotations

import os
from concurrent.futures import ProcessPoolExecutor
from dataclasses import dataclass
from typing import Callable, Collection, Mapping, Sequence

import numpy as np
import pandas as pd

from skipwise.errors import Category, Problem, ProblemCode, SkipwiseError
from skipwise.impute.draws import METHODS, draw_values_const
from skipwise.impute.model import check_method, design_matrix
from skipwise.impute.result import MNAR_CAUTION, check_columns, flag_columns
from skipwise.impute.threads import one_blas_thread

__all__ = ["ChainedResult", "chained_impute", "spawn_generators"]


def spawn_generators(seed: int | None, m: int) -> list[np.random.Generator]:
    """M independent generators from one seed (numpy SeedSequence spawning)."""
    return [np.random.default_rng(s) for s in np.random.SeedSequence(seed).spawn(m)]


def _chain(y: np.ndarray, miss: np.ndarray, todo: list[int], cat_items: list[int], xcov: np.ndarray,
           methods: list[str], iterations: int, k: int, seq: np.random.SeedSequence):
    """One chain: (completed item matrix, mean of the imputed values per iteration, fallback notes).

    Runs with one BLAS thread (see :mod:`skipwise.impute.threads`), so the result is the same
    in this process and in a worker process.
    """
    with one_blas_thread():
        rng = np.random.default_rng(seq)
        cur = y.copy()
        rows = {j: (np.flatnonzero(~miss[:, j]), np.flatnonzero(miss[:, j])) for j in todo}
        y_obs = {j: y[rows[j][0], j] for j in todo}
        for j in todo:
            obs = cur[rows[j][0], j]
            cur[rows[j][1], j] = obs[rng.integers(0, obs.size, size=rows[j][1].size)]
        design = _Design(cur, cat_items, xcov)
        means, fallbacks = [], set()
        for _ in range(iterations):
            for j in todo:
                obs_rows, mis_rows = rows[j]
                vals, note = draw_values_const(methods[j], y_obs[j], *design.split(j, obs_rows, mis_rows),
                                               rng, proper=True, k=k)
                if note:
                    fallbacks.add((j, note))
                cur[mis_rows, j] = vals
                design.update(cur, j)
            means.append([float(cur[rows[j][1], j].mean()) for j in todo])
    return cur, means, fallbacks


def _run_chains(args: tuple, seqs: list, workers: int) -> list:
    if workers <= 1 or len(seqs) <= 1:
        return [_chain(*args, seq) for seq in seqs]
    with ProcessPoolExecutor(max_workers=min(workers, len(seqs))) as pool:
        return list(pool.map(_chain, *zip(*[(*args, seq) for seq in seqs])))


@dataclass(frozen=True, kw_only=True)
class ChainedResult:
    """M completed datasets and how they were made.

    Attributes
    ----------
    datasets
        The M completed frames (copies of the input with the items filled).
    imputed
        Boolean frame: True where a cell was imputed (the same in every dataset).
    methods
        Method used per item.
    iterations
        Iterations of each chain.
    chain_means
        Mean of each item's imputed values per (imputation, iteration), for
        convergence plots: the chains should mix and show no trend.
    notes, cautions
        What a reader should know.
    """

    datasets: tuple[pd.DataFrame, ...]
    imputed: pd.DataFrame
    methods: dict[str, str]
    iterations: int
    seed: int | None
    chain_means: pd.DataFrame
    notes: tuple[str, ...] = ()
    cautions: tuple[str, ...] = (MNAR_CAUTION,)

    @property
    def m(self) -> int:
        return len(self.datasets)

    def stacked(self, column: str = "imputation") -> pd.DataFrame:
        """All datasets in one frame with an imputation-number column (1..M)."""
        return pd.concat([d.assign(**{column: i + 1}) for i, d in enumerate(self.datasets)],
                         ignore_index=True)

    def flags(self, suffix: str = "_imp") -> pd.DataFrame:
        return flag_columns(self.imputed, suffix=suffix)


def chained_impute(data: pd.DataFrame, items: Sequence[str], *, covariates: Sequence[str] = (),
                   method: str = "pmm", methods: Mapping[str, str] | None = None,
                   categorical: Collection[str] = (), m: int = 5, iterations: int = 10, k: int = 5,
                   seed: int | None = None, workers: int | None = 1,
                   progress: Callable[[int], None] | None = None) -> ChainedResult:
    """M completed datasets by chained equations over ``items``.

    Parameters
    ----------
    data
        Survey frame, missing = NaN / NA; items numeric (categories as codes).
    items
        Items to impute; each is predicted by all other items and the covariates.
    covariates
        Complete extra predictors (missing values are set to the mean, noted).
    method, methods
        Default and per-item methods: ``pmm`` (default; keeps the observed value set),
        ``regression``, ``logistic`` (binary), ``multinomial`` (categorical).
    categorical
        Items and covariates entered as indicators when predicting other items.
    m
        Number of imputations.
    iterations
        Iterations per chain (5–20 is usual; van Buuren & Groothuis-Oudshoorn 2011).
    k
        PMM donor pool size.
    seed
        One seed for all chains: imputation i draws from child i of ``SeedSequence(seed)``.
    workers
        Processes running chains at once (default 1; None: one per CPU).  The completed
        datasets do not depend on it.
    progress
        Called with 1 after every finished chain (for a progress bar; with several workers,
        the calls come when all chains are done).

    Returns
    -------
    ChainedResult

    References
    ----------
    van Buuren, S. and Groothuis-Oudshoorn, K. (2011). *J. Stat. Softw.* 45(3).
    Raghunathan, T. E. et al. (2001). *Survey Methodology* 27(1), 85–95.
    """
    items, covariates = list(items), list(covariates)
    methods = {i: (methods or {}).get(i, method) for i in items}
    check_columns(data, items, numeric=True)
    check_columns(data, covariates, role="covariate")
    problems = [p for p in (check_method(h, i, METHODS) for i, h in methods.items()) if p]
    if m < 1 or iterations < 1:
        problems.append(Problem(code=ProblemCode.BAD_VALUE, category=Category.USAGE,
                                message=f"m and iterations must be at least 1 (got {m}, {iterations})"))
    if problems:
        raise SkipwiseError(problems)
    notes: list[str] = []
    y = data.loc[:, items].astype("float64").to_numpy(copy=True)
    miss = np.isnan(y)
    empty = [it for j, it in enumerate(items) if miss[:, j].all()]
    if empty:
        raise SkipwiseError([Problem(code=ProblemCode.BAD_DATA, category=Category.DATA, item=it,
                                     message=f"item '{it}' has no observed value to impute from")
                             for it in empty])
    xcov, n_filled = design_matrix(data, covariates, categorical)
    if n_filled:
        notes.append(f"{n_filled:,} missing covariate value(s) set to the mean")
    todo = [j for j in range(len(items)) if miss[:, j].any()]
    cat_items = [j for j in range(len(items)) if items[j] in categorical]
    datasets, chain_rows = [], []
    fallbacks: set[str] = set()
    n_workers = (os.cpu_count() or 1) if workers is None else int(workers)
    seqs = np.random.SeedSequence(seed).spawn(m)
    args = (y, miss, todo, cat_items, xcov, [methods[i] for i in items], iterations, k)
    for imp, (cur, means, notes_j) in enumerate(_run_chains(args, seqs, n_workers)):
        fallbacks |= {f"{items[j]}: {note}" for j, note in notes_j}
        for it, row in enumerate(means):
            chain_rows.append({"imputation": imp + 1, "iteration": it + 1,
                               **{items[j]: v for j, v in zip(todo, row)}})
        done = data.copy()
        for j in todo:
            col = items[j]
            if pd.api.types.is_integer_dtype(done[col]) and not np.all(np.mod(cur[:, j][miss[:, j]], 1) == 0):
                done[col] = done[col].astype("float64")
            done.iloc[np.flatnonzero(miss[:, j]), done.columns.get_loc(col)] = cur[miss[:, j], j]
        datasets.append(done)
        if progress is not None:
            progress(1)
    notes.insert(0, f"chained equations: {m} imputation(s), {iterations} iteration(s) each, seed {seed}")
    notes += sorted(fallbacks)
    chain = pd.DataFrame(chain_rows).set_index(["imputation", "iteration"])
    return ChainedResult(datasets=tuple(datasets), imputed=pd.DataFrame(miss, index=data.index, columns=items),
                      methods=methods, iterations=iterations, seed=seed, chain_means=chain,
                      notes=tuple(notes))


class _Design:
    """The predictor matrix of a chain, kept current as items are re-imputed.

    One column-major array: the constant, then one block per item (a numeric item's current
    values; a categorical item's indicators of its current values, first one left out),
    then the covariates.  Predicting item j takes every column but j's block, in this
    order: the matrix :func:`draw_values` builds with the constant in front, in the same
    (column-major) memory layout, so the fits round exactly as before.  A step gathers its
    cases column by column from contiguous columns instead of assembling the matrix anew.
    """

    def __init__(self, cur: np.ndarray, cat_items: list[int], xcov: np.ndarray) -> None:
        self.cat = set(cat_items)
        self.xcov = xcov
        self.blocks = [self._block(cur, c) for c in range(cur.shape[1])]
        self._assemble()

    def _block(self, cur: np.ndarray, c: int) -> np.ndarray:
        if c not in self.cat:
            return cur[:, c:c + 1]
        _, codes = np.unique(cur[:, c], return_inverse=True)
        if codes.max(initial=0) < 1:
            return np.empty((cur.shape[0], 0))
        return (codes[:, None] == np.arange(1, codes.max() + 1)[None, :]).astype(float)

    def _assemble(self) -> None:
        widths = [b.shape[1] for b in self.blocks]
        self.starts = np.concatenate([[1], 1 + np.cumsum(widths)]).astype(np.int64)
        n, width = self.xcov.shape[0], int(self.starts[-1]) + self.xcov.shape[1]
        self.matrix = np.empty((n, width), order="F")
        self.matrix[:, 0] = 1.0
        for c, b in enumerate(self.blocks):
            self.matrix[:, self.starts[c]:self.starts[c + 1]] = b
        self.matrix[:, self.starts[-1]:] = self.xcov
        self.columns: dict[int, np.ndarray] = {}

    def _gather(self, rows: np.ndarray, cols: np.ndarray) -> np.ndarray:
        out = np.empty((rows.size, cols.size), order="F")
        for i, c in enumerate(cols):
            np.take(self.matrix[:, c], rows, out=out[:, i])
        return out

    def split(self, j: int, obs_rows: np.ndarray, mis_rows: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """(observed cases, missing cases) of the predictors of item ``j``, constant first."""
        cols = self.columns.get(j)
        if cols is None:
            a, b = int(self.starts[j]), int(self.starts[j + 1])
            cols = self.columns[j] = np.r_[0:a, b:self.matrix.shape[1]]
        return self._gather(obs_rows, cols), self._gather(mis_rows, cols)

    def update(self, cur: np.ndarray, c: int) -> None:
        """Item ``c`` was re-imputed: refresh its block."""
        b = self._block(cur, c)
        a, e = int(self.starts[c]), int(self.starts[c + 1])
        self.blocks[c] = b
        if b.shape[1] == e - a:
            self.matrix[:, a:e] = b
        else:                      # a categorical item gained or lost a value
            self._assemble()


def _predictors(cur: np.ndarray, j: int, cat_items: list[int], xcov: np.ndarray) -> np.ndarray:
    """All items but ``j`` (categorical ones as indicators) plus the covariate matrix.

    The matrix :class:`_Design` keeps (without its constant); kept as the plain statement
    of what a chain predicts from, and for the tests.
    """
    parts = []
    for c in range(cur.shape[1]):
        if c == j:
            continue
        if c in cat_items:
            _, codes = np.unique(cur[:, c], return_inverse=True)
            if codes.max(initial=0) >= 1:
                parts.append((codes[:, None] == np.arange(1, codes.max() + 1)[None, :]).astype(float))
        else:
            parts.append(cur[:, c:c + 1])
    parts.append(xcov)
    return np.hstack(parts) if parts else np.empty((cur.shape[0], 0))
