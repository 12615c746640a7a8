"""Simulated interviews: what the instrument recorded, and the true status of every cell.

The walk goes item by item in interview order over all interviewed cases at
once (no loop over cases).  For each item:

1. its universe is decided from the *recorded* earlier answers with the
   hand-written rules of :mod:`skipwise.demo.items` (true, false, or unknown
   when a gate was answered don't know / refused / left blank);
2. the instrument asks it when the universe is true; when it is unknown the
   instrument skips it (blank: ``gate_unknown``), except that in person the
   interviewer sometimes asks anyway (then the answer stands);
3. asked items get the respondent's true value, or item nonresponse
   (:mod:`skipwise.demo.faults`);
4. leaf items get routing faults (``off_route``, ``wrong_code``, ``invalid``);
5. in-person processing stores the not-asked code -1 in skipped cells (web
   exports leave them blank);
6. on the web form ``savings`` offers "Prefer not to say": a web refusal is
   stored as -8 (``prefer_not_to_say``), in person as -9 (``refused``).

The closing ``comment`` box is optional: every case who reaches it may write
something (:data:`~skipwise.demo.faults.COMMENT_RATE`) and the rest leave it
blank, which is ``left_blank`` (no answer was required), never item
nonresponse.  Its draws come last, so the other items' simulation is the same
with or without it.

Interviews that break off stop at an item: every later cell is blank.  The
stop is never later than ``life_sat``, so at least five blank applicable
cells follow the last recorded answer or code; those cells (and any
in-universe blank after the last answer, the optional comment box's too) are
labelled ``breakoff``.  The optional item neither sets nor counts toward that
point.  Completed interviews always answer the final required item
(``recontact``).

The status of every cell is written from what the simulation did, in the
vocabulary of docs/contract.md §1.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from skipwise.demo import faults as FL
from skipwise.demo.items import ABSENT, COLUMNS, ITEM_NAMES, ITEMS, KNOWN, UNKNOWN, F, Record, T, U

__all__ = ["STATUSES", "Interviews", "simulate_interviews", "LATEST_STOP"]

#: Status vocabulary (docs/contract.md §1) with the integer codes used during the walk.
STATUSES: tuple[str, ...] = ("answered", "skipped", "dont_know", "refused", "item_missing", "wrong_code",
                             "off_route", "gate_unknown", "breakoff", "invalid", "left_blank",
                             "prefer_not_to_say")
(AN, SK, DK, RF, IM, WC, OR, GU, BO, INV, LB, PN) = range(len(STATUSES))
_ACTIVE = (AN, DK, RF, OR, INV, PN)   # the cell holds an answer, a nonresponse code or an invalid value
#: Break-offs stop at the latest at this item (so enough blanks always follow).
LATEST_STOP = "life_sat"
_NOT_ASKED, _DK, _REF = -1.0, -7.0, -9.0


@dataclass(frozen=True, kw_only=True)
class Interviews:
    """Recorded data and truth of the interviewed cases (row-aligned).

    ``values`` holds every questionnaire column as recorded (codes as
    numbers, NaN blank); ``status`` one column per item (status strings);
    ``true_values`` the true value of every column where the item applies by
    the routing evaluated on the true answers, else NaN; ``stop`` the index
    of the item where a break-off happened (number of items when complete).
    """

    values: pd.DataFrame
    status: pd.DataFrame
    true_values: pd.DataFrame
    stop: np.ndarray


def _state(status: np.ndarray) -> np.ndarray:
    st = np.full(status.shape, UNKNOWN, dtype=np.int8)
    st[status == AN] = KNOWN
    st[(status == SK) | (status == OR) | (status == LB)] = ABSENT  # left blank: no answer was required
    return st


def simulate_interviews(rng: np.random.Generator, truth: pd.DataFrame, mode: np.ndarray,
                        breaks_off: np.ndarray) -> Interviews:
    """Walk the questionnaire for every interviewed case.

    Parameters
    ----------
    rng
        Random generator.
    truth
        True values of the interviewed households (one row per case).
    mode
        Interview mode per case (1 in person, 2 web).
    breaks_off
        Whether each case breaks off.
    """
    n, p = len(truth), len(ITEMS)
    pos = {name: j for j, name in enumerate(ITEM_NAMES)}
    stop = np.where(breaks_off, rng.integers(5, pos[LATEST_STOP] + 1, n), p)
    in_person = np.asarray(mode) == 1
    cov = {k: truth[k].to_numpy(dtype=float) for k in ("age", "sex", "district", "income")}
    rec, true_rec = Record(n), Record(n)
    status = np.empty((n, p), dtype=np.int8)
    values = {c: np.full(n, np.nan) for c in COLUMNS}
    true_values = {c: np.full(n, np.nan) for c in COLUMNS}
    for j, item in enumerate(ITEMS):
        u = item.rule(rec) if item.rule else np.full(n, T, dtype=np.int8)
        tu = item.rule(true_rec) if item.rule else np.full(n, T, dtype=np.int8)
        alive = j < stop
        if item.optional:
            status[:, j] = _comment_box(rng, item.columns[0], u, alive, values, true_values, rec)
            continue
        anyway = (u == U) & (tu == T) & in_person & (rng.random(n) < FL.ASK_ANYWAY_RATE)
        asked = alive & ((u == T) | anyway)
        p_dk, p_ref, p_blank = FL.nonresponse_probs(item.name, cov)
        draw = rng.random(n)
        outcome = np.select([draw < p_dk, draw < p_dk + p_ref, draw < p_dk + p_ref + p_blank], [DK, RF, IM], AN)
        st = np.where(u == F, SK, np.where(u == U, GU, IM)).astype(np.int8)
        st[asked] = outcome[asked]
        st[asked & (outcome == IM) & (u == U)] = GU   # asked anyway, left blank: the gate stays unknown
        true = {c: truth[c].to_numpy(dtype=float) for c in item.columns}
        stored = {c: np.full(n, np.nan) for c in item.columns}
        if item.name in FL.WEB_DECLINE_CODE:
            st[(st == RF) & ~in_person] = PN
        for c in item.columns:
            stored[c][st == AN] = true[c][st == AN]
            stored[c][st == DK] = _DK
            stored[c][st == RF] = _REF
            stored[c][st == PN] = FL.WEB_DECLINE_CODE.get(item.name, np.nan)
        if item.leaf:
            st = _faults(rng, item.name, st, u, alive, stored[item.name], true[item.name])
        for c in item.columns:
            stored[c][(st == SK) & in_person] = _NOT_ASKED
            values[c] = stored[c]
            true_values[c] = np.where(tu == T, true[c], np.nan)
        status[:, j] = st
        state = _state(st)
        for c in (item.name, *item.columns):
            rec.value[c] = stored[c] if c in stored else np.full(n, np.nan)
            rec.state[c] = state
            rec.has_answer[c] = st == AN
            true_rec.value[c] = true[c] if c in true else np.full(n, np.nan)
            true_rec.state[c] = np.where(tu == T, KNOWN, ABSENT).astype(np.int8)
            # answered() is a fact about the stored cell, so the true walk reads the recorded one
            true_rec.has_answer[c] = rec.has_answer[c]
    _mark_breakoffs(status, breaks_off, np.array([not it.optional for it in ITEMS]))
    return Interviews(
        values=pd.DataFrame(values),
        status=pd.DataFrame({name: pd.Series(np.asarray(STATUSES, dtype=object)[status[:, j]], dtype="string")
                             for j, name in enumerate(ITEM_NAMES)}),
        true_values=pd.DataFrame(true_values), stop=stop)


def _faults(rng: np.random.Generator, name: str, st: np.ndarray, u: np.ndarray, alive: np.ndarray,
            stored: np.ndarray, true: np.ndarray) -> np.ndarray:
    """Inject routing faults into one leaf item (in place on ``stored``); return the new statuses."""
    n = len(st)
    st = st.copy()
    draw = rng.random((n, 3))
    off = alive & (u == F) & (draw[:, 0] < FL.OFF_ROUTE_RATE.get(name, 0.0))
    if off.any():
        # mostly a plausible value, sometimes a don't-know code: both are off route
        stored[off] = np.where(rng.random(n) < 0.8, true, _DK)[off]
        st[off] = OR
    wrong = (st == AN) & (u == T) & (draw[:, 1] < FL.WRONG_CODE_RATE.get(name, 0.0))
    stored[wrong] = _NOT_ASKED
    st[wrong] = WC
    holds_value = (st == AN) | ((st == OR) & (stored != _DK))
    bad = holds_value & (draw[:, 2] < FL.INVALID_RATE.get(name, 0.0))
    if bad.any():
        options = np.asarray(FL.INVALID_VALUES[name], dtype=float)
        stored[bad] = options[rng.integers(0, len(options), n)][bad]
        st[bad] = INV
    return st


def _mark_breakoffs(status: np.ndarray, breaks_off: np.ndarray, required: np.ndarray) -> None:
    """Label blank applicable cells after a broken-off case's last recorded answer or code (in place).

    Only ``required`` items set the last answer and count in the run of blanks; once a case broke
    off, the blank optional cells after that point are break-offs too.
    """
    n, p = status.shape
    active = np.isin(status, _ACTIVE) & required[None, :]
    last = np.where(active.any(axis=1), p - 1 - np.argmax(active[:, ::-1], axis=1), -1)
    trailing = np.isin(status, (IM, GU, LB)) & (np.arange(p)[None, :] > last[:, None])
    runs = (trailing & required[None, :]).sum(axis=1)
    if (runs[breaks_off] < 4).any() or (runs[~breaks_off] > 0).any():
        raise RuntimeError("break-off simulation inconsistent: stops must leave >= 4 blank applicable cells, "
                             "completed interviews none")
    status[trailing & breaks_off[:, None]] = BO


def _comment_box(rng: np.random.Generator, col: str, u: np.ndarray, alive: np.ndarray,
                 values: dict[str, np.ndarray], true_values: dict[str, np.ndarray], rec: Record) -> np.ndarray:
    """The optional open comment box: a few cases write a comment, the rest leave it blank."""
    n = len(u)
    writes = alive & (u == T) & (rng.random(n) < FL.COMMENT_RATE)
    pick = rng.integers(0, len(FL.COMMENTS), n)
    stored = np.full(n, np.nan, dtype=object)
    stored[writes] = np.asarray(FL.COMMENTS, dtype=object)[pick[writes]]
    st = np.where(u == F, SK, np.where(u == U, GU, LB)).astype(np.int8)
    st[writes] = AN
    values[col] = stored
    true_values[col] = stored.copy()  # what a respondent writes is the truth of an open text
    rec.value[col] = np.full(n, np.nan)
    rec.state[col] = _state(st)
    rec.has_answer[col] = st == AN
    return st
