"""Distinct valuation inputs found by hashing rows (grantval/measurement/unique.py)."""

import numpy as np

def test_distinct_rows_match_a_lexicographic_sort():
    # reference: numpy's np.unique(axis=0) (the rows sorted); the hashed rows must give the same set
    # and map every row to an equal one
    from grantval.measurement.unique import distinct_rows

    rng = np.random.default_rng(3)
    rows = rng.choice([0.1, 0.25, 7.0, np.nan], size=(5000, 4))
    uniq, inverse = distinct_rows(rows)
    ref = np.unique(rows, axis=0)
    assert len(uniq) == len(np.unique(rows.view(np.uint64), axis=0)) <= 256
    assert np.array_equal(uniq[inverse], rows, equal_nan=True)
    assert {r.tobytes() for r in uniq} == {r.tobytes() for r in np.unique(rows.view(np.uint64), axis=0).view(float)}
    assert len(ref) >= len(uniq)  # np.unique keeps NaN rows apart; equal bits are one row here


def test_a_hash_collision_falls_back_to_sorting(monkeypatch):
    from grantval.measurement import unique

    monkeypatch.setattr(unique, "_MIX", np.uint64(0))  # every row hashes to 0: one "distinct" row
    rows = np.array([[1.0, 2.0], [3.0, 4.0], [1.0, 2.0]])
    uniq, inverse = unique.distinct_rows(rows)
    assert len(uniq) == 2 and np.array_equal(uniq[inverse], rows)
