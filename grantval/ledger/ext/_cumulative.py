"""Sums of quantities per key up to a date, looked up for many (key, date) queries at once."""

from __future__ import annotations

import numpy as np


def sum_through(keys: np.ndarray, days: np.ndarray, qty: np.ndarray, q_keys: np.ndarray, q_days: np.ndarray,
                strict: bool = False) -> np.ndarray:
    """Per query: the sum of ``qty`` over rows with the query's key dated on or before (``strict``: before) its day.

    ``keys`` and ``q_keys`` are non-negative integers; ``days`` and ``q_days`` day numbers (int64) or
    ``datetime64[D]``.
    """
    keys = np.asarray(keys, dtype=np.int64)
    q_keys = np.asarray(q_keys, dtype=np.int64)
    d = np.asarray(days).astype("datetime64[D]").astype(np.int64)
    qd = np.asarray(q_days).astype("datetime64[D]").astype(np.int64)
    if not len(keys):
        return np.zeros(len(q_keys))
    shift = np.int64(1) << np.int64(40)
    base = d.min()
    code = keys * shift + (d - base)
    order = np.argsort(code, kind="stable")
    code, csum = code[order], np.concatenate([[0.0], np.cumsum(np.asarray(qty, dtype=float)[order])])
    want = q_keys * shift + np.clip(qd - base, -1, shift - 1)
    hi = np.searchsorted(code, want, side="left" if strict else "right")
    lo = np.searchsorted(code, q_keys * shift, side="left")
    return np.where(hi > lo, csum[hi] - csum[lo], 0.0)
