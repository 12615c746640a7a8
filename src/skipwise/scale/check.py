"""``skipwise check`` on a Dask cluster: per-partition counts merged on the client, duplicates by hash buckets.

Each worker counts its partition (:func:`skipwise.checkcounts.check_counts`,
with the partition's first row number, so rows are named as in the whole
file) and splits its case ids into buckets by a hash of the id, kept in the
worker's memory.  One task per bucket then gathers that bucket from every
partition — an id lands in one bucket whichever partition holds it — and
returns only a :class:`~skipwise.checkcounts.DuplicateSummary`.  The client
adds the counts and the summaries and makes the findings with the in-memory
engine's own code (:func:`skipwise.checkdata.check_findings`).  The client
holds counts and at most ``top`` ids and values per finding, never the ids.
"""

from __future__ import annotations

from typing import Callable

import numpy as np
import pandas as pd

from skipwise.scale.sources import Part, read_part

__all__ = ["check_on_cluster"]


def _count(part: Part, q, meta, dtypes, top: int, start: int, buckets: int):
    from skipwise.caseids import id_values
    from skipwise.checkcounts import check_counts, id_frame

    frame = read_part(part, meta, dtypes)
    counts = check_counts(frame, q, top=top, start=start)
    if q.case_id not in frame.columns:
        return counts, [pd.DataFrame({"id": [], "row": []})] * buckets
    ids = id_frame(id_values(frame[q.case_id]), start)
    which = pd.util.hash_pandas_object(ids["id"], index=False).to_numpy() % np.uint64(buckets)
    return counts, [ids[which == b] for b in range(buckets)]


def _counts_of(pair):
    return pair[0]


def _bucket(pair, b: int):
    return pair[1][b]


def _duplicates(top: int, *frames: pd.DataFrame):
    from skipwise.checkcounts import duplicate_summary

    return duplicate_summary(pd.concat(frames, ignore_index=True), top)


def check_on_cluster(parts: list[Part], q, *, client, meta=None, dtypes=None, top: int = 5,
                     progress: Callable[[int], None] | None = None):
    """The :class:`~skipwise.checkdata.DataCheck` of the partitions ``parts`` (in file order)."""
    from distributed import as_completed

    from skipwise.checkdata import check_findings

    head = read_part(Part(parts[0].path, (), 0), meta, dtypes)
    starts = np.concatenate([[0], np.cumsum([p.rows for p in parts])[:-1]]).astype(int)
    buckets = max(1, len(parts))
    q_f, meta_f = client.scatter([q, meta], broadcast=True, hash=False)
    tag = id(parts)
    kept = [client.submit(_count, p, q_f, meta_f, dtypes, top, int(s), buckets, key=f"skipwise-check-{i}-{tag}",
                          pure=False) for i, (p, s) in enumerate(zip(parts, starts))]
    try:
        small = [client.submit(_counts_of, k, key=f"skipwise-checkc-{i}-{tag}") for i, k in enumerate(kept)]
        index = {f.key: i for i, f in enumerate(small)}
        got: dict[int, object] = {}
        for fut in as_completed(small):
            got[index[fut.key]] = fut.result()
            if progress is not None:
                progress(parts[index[fut.key]].rows)
        counts = got[0]
        for i in range(1, len(parts)):
            counts = counts + got[i]
        pieces = [[client.submit(_bucket, k, b, key=f"skipwise-checkb-{i}-{b}-{tag}") for i, k in enumerate(kept)]
                  for b in range(buckets)]
        summaries = client.gather([client.submit(_duplicates, top, *col, key=f"skipwise-checkd-{b}-{tag}")
                                   for b, col in enumerate(pieces)])
    finally:
        client.cancel(kept)
    dups = summaries[0]
    for s in summaries[1:]:
        dups = dups + s
    import dataclasses

    counts = dataclasses.replace(counts, duplicates=dups)
    return check_findings(counts, q, [str(c) for c in head.columns], top=top)
