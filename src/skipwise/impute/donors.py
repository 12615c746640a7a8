"""Vectorized donor drawing for hot-deck imputation (no loop over cases).

Three pieces: drawing a random donor within classes (optionally with
probability proportional to a weight), drawing a near donor on standardized
covariates within classes, and enforcing a donor-use limit by sequential
rounds.

Donor-use limit rule (documented in docs/imputation.md): recipients are put in
one random order. In each round every still-unserved recipient draws a donor
from the donors of its class that have capacity left. A donor chosen by more
recipients than its remaining capacity keeps those earliest in the random
order; the others go to the next round, which draws again from the donors
still with capacity. Rounds repeat until every recipient is served or its
class has no capacity left (those recipients then collapse to a coarser class).
Every round serves at least one recipient per chosen donor, so it terminates.
"""

from __future__ import annotations

from typing import Callable

import numpy as np
from scipy.spatial import cKDTree

__all__ = ["draw_random", "draw_nearest", "assign_with_limit", "group_codes"]

Draw = Callable[[np.ndarray, np.ndarray], np.ndarray]


def group_codes(columns: list[np.ndarray], n: int) -> np.ndarray:
    """Dense integer codes of the combinations of ``columns`` (missing values form their own code).

    Each column is factorized on its own, so columns mixing numbers and text work.
    """
    if not columns:
        return np.zeros(n, dtype=np.int64)
    import pandas as pd

    codes = [pd.factorize(pd.Series(c, dtype=object) if np.asarray(c).dtype == object else c,
                          sort=True, use_na_sentinel=False)[0] for c in columns]
    if len(codes) == 1:
        return codes[0].astype(np.int64)
    frame = pd.DataFrame({i: c for i, c in enumerate(codes)})
    return frame.groupby(list(frame.columns), sort=True).ngroup().to_numpy(np.int64)


def draw_random(rec_codes: np.ndarray, pool: np.ndarray, codes: np.ndarray,
                weights: np.ndarray | None, rng: np.random.Generator) -> np.ndarray:
    """For each recipient code, a random donor (row position) from ``pool`` with the same code; -1 if none.

    With ``weights``, a donor's chance is proportional to its weight.
    """
    n_codes = int(max(codes.max(initial=-1), rec_codes.max(initial=-1))) + 1
    pool_codes = codes[pool]
    order = np.argsort(pool_codes, kind="stable")
    sorted_rows = pool[order]
    counts = np.bincount(pool_codes, minlength=n_codes)
    starts = np.concatenate([[0], np.cumsum(counts)[:-1]])
    nc = counts[rec_codes]
    st = starts[rec_codes]
    u = rng.random(rec_codes.size)
    out = np.full(rec_codes.size, -1, dtype=np.int64)
    if weights is None:
        ok = nc > 0
        pos = st + np.minimum((u * nc).astype(np.int64), nc - 1)
    else:
        cw = np.concatenate([[0.0], np.cumsum(weights[sorted_rows])])
        lo, hi = cw[st], cw[st + nc]
        ok = (nc > 0) & (hi > lo)
        pos = np.searchsorted(cw, lo + u * (hi - lo), side="right") - 1
        pos = np.clip(pos, st, st + np.maximum(nc, 1) - 1)
    out[ok] = sorted_rows[pos[ok]]
    return out


def draw_nearest(rec_rows: np.ndarray, rec_codes: np.ndarray, pool: np.ndarray, codes: np.ndarray,
                 z: np.ndarray, k: int, rng: np.random.Generator) -> np.ndarray:
    """A random one of the ``k`` nearest donors (Euclidean on ``z``) with the recipient's code; -1 if none.

    Classes are kept apart in one k-d tree by an extra coordinate, code × a
    distance larger than any within-class distance, so a cross-class neighbour
    is always farther than every same-class one.
    """
    out = np.full(rec_rows.size, -1, dtype=np.int64)
    if pool.size == 0 or rec_rows.size == 0:
        return out
    span = float(np.sqrt(((z.max(axis=0) - z.min(axis=0)) ** 2).sum())) if z.size else 0.0
    big = 2.0 * span + 1.0
    coords = np.column_stack([z, codes.astype(np.float64) * big])
    tree = cKDTree(coords[pool])
    kk = min(k, pool.size)
    _, ind = tree.query(coords[rec_rows], k=kk)
    ind = ind.reshape(rec_rows.size, kk)
    valid = codes[pool[ind]] == rec_codes[:, None]
    n_valid = valid.sum(axis=1)
    pick = np.minimum((rng.random(rec_rows.size) * n_valid).astype(np.int64), np.maximum(n_valid - 1, 0))
    ok = n_valid > 0
    out[ok] = pool[ind[ok, pick[ok]]]
    return out


def assign_with_limit(n_rec: int, donors: np.ndarray, draw: Callable[[np.ndarray, np.ndarray], np.ndarray],
                      max_use: int | None, uses: np.ndarray,
                      rng: np.random.Generator) -> tuple[np.ndarray, int]:
    """Serve ``n_rec`` recipients by rounds, never using a donor more than ``max_use`` times.

    Parameters
    ----------
    n_rec
        Number of recipients (numbered 0..n_rec-1 for ``draw``).
    donors
        Row positions of eligible donors.
    draw
        ``draw(recipients, pool) -> donor row or -1`` for the given recipient numbers.
    max_use
        Limit per donor, or None for no limit (one round).
    uses
        Per row, how often it has already donated (updated in place: counts carry
        over when a recipient collapses to a coarser class).
    rng
        Random generator (for the recipients' random order).

    Returns
    -------
    (donor row per recipient or -1, number of rounds)
    """
    chosen = np.full(n_rec, -1, dtype=np.int64)
    if max_use is None:
        chosen[:] = draw(np.arange(n_rec), donors)
        ok = chosen >= 0
        np.add.at(uses, chosen[ok], 1)
        return chosen, 1
    priority = rng.permutation(n_rec)
    pending = np.arange(n_rec)
    rounds = 0
    while pending.size:
        rounds += 1
        pool = donors[uses[donors] < max_use]
        pick = draw(pending, pool)
        got = pick >= 0
        pending, pick = pending[got], pick[got]   # no capacity left in class: leave for collapse
        if not pending.size:
            break
        order = np.lexsort((priority[pending], pick))
        d = pick[order]
        first = np.r_[True, d[1:] != d[:-1]]
        group_start = np.maximum.accumulate(np.where(first, np.arange(d.size), 0))
        rank = np.arange(d.size) - group_start
        accept = rank < (max_use - uses[d])
        winners = pending[order][accept]
        chosen[winners] = d[accept]
        np.add.at(uses, d[accept], 1)
        pending = np.sort(pending[order][~accept])
    return chosen, rounds
