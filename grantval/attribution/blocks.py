"""The expense schedule of a large ledger computed a block of grants at a time.

Grants do not interact in the engine: each grant's cost at a date depends on its own tranches,
changes, layers and the estimates in force for it.  So a schedule can be computed for contiguous
blocks of grants and the rows put together; the result is the same to the cent (the same
arithmetic on the same numbers).  It is faster for large ledgers because one block's arrays
(about :data:`BLOCK_TRANCHES` tranches) stay in the processor's cache across the arithmetic of a
date, where the whole ledger's arrays (a million tranches and more) go through memory at every
step.

Only inputs without the features that reach across the engine's arrays are blocked: cost hooks
(performance units, liabilities, service before the grant date), layers besides the grant-date
ones (modifications, purchase-plan resets), moved service ends, scenario adjustments of the
estimates and shared memos.  Other inputs take the whole-ledger path.
"""

from __future__ import annotations

from dataclasses import fields, replace

import numpy as np

from grantval.attribution.engine import Measurement
from grantval.attribution.inputs import ExpenseInputs
from grantval.attribution.layers import CostLayers

#: tranches per block (a block's per-tranche arrays of 8 bytes: 1 MiB each)
BLOCK_TRANCHES = 131_072
#: below this many tranches the whole ledger is one block
MIN_TRANCHES = 2 * BLOCK_TRANCHES


def blockable(inp: ExpenseInputs) -> bool:
    """Whether ``inp`` may be computed by blocks of grants (see the module docstring)."""
    t_grant = np.asarray(inp.t_grant)
    return (not inp.cost_hooks and inp.memo is None and inp.service_end_history is None
            and inp.estimate_adjust is None and len(inp.layers) == len(inp.t_qty)  # grant-date layers only
            and bool(np.all(np.diff(t_grant) >= 0)) and len(inp.t_qty) >= MIN_TRANCHES)


def grant_blocks(t_grant: np.ndarray, n_grants: int, size: int | None = None) -> list[tuple[int, int, int, int]]:
    """Contiguous ``(first grant, end grant, first tranche, end tranche)`` blocks of about ``size`` tranches.

    ``t_grant`` is sorted; a block ends at a grant boundary, so one grant's tranches are never split.
    ``size`` defaults to :data:`BLOCK_TRANCHES`.
    """
    size = BLOCK_TRANCHES if size is None else size
    starts = np.searchsorted(t_grant, np.arange(n_grants + 1), side="left")  # first tranche of each grant
    out, g0 = [], 0
    while g0 < n_grants:
        g1 = int(np.searchsorted(starts, starts[g0] + size, side="right")) - 1
        g1 = min(max(g1, g0 + 1), n_grants)
        out.append((g0, g1, int(starts[g0]), int(starts[g1])))
        g0 = g1
    return out


def sub_inputs(inp: ExpenseInputs, g0: int, g1: int, t0: int, t1: int) -> ExpenseInputs:
    """The inputs of grants ``g0:g1`` (tranches ``t0:t1``) alone, positions renumbered from 0."""
    c = np.flatnonzero((inp.c_tranche >= t0) & (inp.c_tranche < t1))
    lay = inp.layers
    layers = CostLayers(*(getattr(lay, f)[t0:t1] for f in ("tranche", "fair_value", "start", "set_id", "kind",
                                                            "end", "kept")))
    layers.tranche = layers.tranche - t0
    return replace(
        inp, grant_id=inp.grant_id[g0:g1], group=inp.group[g0:g1], grant_date=inp.grant_date[g0:g1],
        last_vest=inp.last_vest[g0:g1], t_grant=np.asarray(inp.t_grant)[t0:t1] - g0, t_vest=inp.t_vest[t0:t1],
        t_qty=inp.t_qty[t0:t1], t_fv=inp.t_fv[t0:t1], c_tranche=inp.c_tranche[c] - t0, c_date=inp.c_date[c],
        c_qty=inp.c_qty[c], c_kind=inp.c_kind[c], t_service_end=inp.t_service_end[t0:t1], layers=layers,
        _prep=None)


def map_blocks(inp: ExpenseInputs, func):
    """``func(sub-inputs)`` of each block of grants of :func:`grant_blocks`, in order: the blocks are
    independent, so they are made in worker processes where that pays (:func:`grantval.workers.ordered_map`)."""
    from grantval.workers import ordered_map

    todo = grant_blocks(np.asarray(inp.t_grant), inp.n_grants)
    return ordered_map(lambda b: func(sub_inputs(inp, *b)), todo)


def joined(parts: list[Measurement]) -> Measurement:
    """One measurement of the blocks' measurements, in block order (per-grant and per-tranche arrays)."""
    out = {}
    for f in fields(Measurement):
        values = [getattr(p, f.name) for p in parts]
        out[f.name] = None if any(v is None for v in values) else np.concatenate(values)
    return Measurement(**out)
