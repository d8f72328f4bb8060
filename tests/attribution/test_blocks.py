"""The schedule by blocks of grants is the whole-ledger schedule, figure for figure (grantval/attribution/blocks.py).

Reference: the engine's own whole-ledger path (blocks are a performance device; the figures must
not move by a cent).  Ledgers are the seeded random ones of random_ledgers.py (invented data).
"""

from __future__ import annotations

from dataclasses import fields

import numpy as np
import pytest

from grantval import api
from grantval.attribution import blocks
from grantval.attribution.engine import Measurement
from tests.attribution.random_ledgers import random_ledger
from tests.factory import write_ledger


def _run(folder, monkeypatch, blocked: bool, **policy):
    monkeypatch.setattr(blocks, "MIN_TRANCHES", 0 if blocked else 10**12)
    monkeypatch.setattr(blocks, "BLOCK_TRANCHES", 7)
    return api.expense(folder, through="2031-03-15", start="2027-01-01", forecast_through="2032-12-31", **policy)


@pytest.mark.parametrize("attribution", ["graded", "straight-line"])
@pytest.mark.parametrize("forfeitures", ["as-occur", "estimate"])
@pytest.mark.parametrize("seed", [3, 4])
def test_blocks_give_the_whole_ledgers_figures(tmp_path, monkeypatch, seed, attribution, forfeitures):
    folder = write_ledger(tmp_path / "l", random_ledger(seed, n=30))
    kw = dict(attribution=attribution, forfeitures=forfeitures)
    whole, parts = _run(folder, monkeypatch, False, **kw), _run(folder, monkeypatch, True, **kw)
    assert blocks.blockable(parts.inputs)  # the blocked path ran (MIN_TRANCHES is 0 now)
    assert len(blocks.grant_blocks(np.asarray(parts.inputs.t_grant), parts.inputs.n_grants)) > 5  # of 7 tranches
    a, b = whole.schedule, parts.schedule
    for name in ("opening_cents", "cumulative_cents", "expense_cents", "forecast_cents"):
        assert np.array_equal(getattr(a, name), getattr(b, name)), name
    assert a.expense_cents.any() and a.forecast_cents.any()
    for f in fields(Measurement):
        x, y = getattr(a.at_through, f.name), getattr(b.at_through, f.name)
        assert (x is None and y is None) or np.array_equal(x, y), f.name


def test_blocks_end_at_grant_boundaries():
    t_grant = np.array([0, 0, 0, 1, 2, 2, 2, 2, 3, 4])
    got = blocks.grant_blocks(t_grant, 5, size=3)
    assert got == [(0, 1, 0, 3), (1, 2, 3, 4), (2, 3, 4, 8), (3, 5, 8, 10)]
    covered = np.concatenate([np.arange(t0, t1) for _, _, t0, t1 in got])
    assert covered.tolist() == list(range(10))


def test_features_across_the_arrays_take_the_whole_ledger_path(tmp_path, monkeypatch):
    # a modification adds layers of its own: such inputs are not blocked
    from tests.attribution.test_modification_schedules import shortened

    monkeypatch.setattr(blocks, "MIN_TRANCHES", 0)
    run = api.expense(shortened(tmp_path / "m"), through="2028-12-31")
    assert not blocks.blockable(run.inputs)


def test_blocks_in_worker_processes_give_the_same_figures(tmp_path, monkeypatch):
    # reference: the blocks computed one after another in this process (grantval/workers.py)
    folder = write_ledger(tmp_path / "l", random_ledger(5, n=30))
    monkeypatch.setenv("GRANTVAL_PROCESSES", "1")
    here = _run(folder, monkeypatch, True).schedule
    monkeypatch.setenv("GRANTVAL_PROCESSES", "2")
    there = _run(folder, monkeypatch, True).schedule
    for name in ("opening_cents", "cumulative_cents", "expense_cents", "forecast_cents"):
        assert np.array_equal(getattr(here, name), getattr(there, name)), name
    for f in fields(Measurement):
        x, y = getattr(here.at_through, f.name), getattr(there.at_through, f.name)
        assert (x is None and y is None) or np.array_equal(x, y), f.name
