"""Backward induction on the binomial lattice used when exercise is optimal (private).

See :mod:`grantval.pricing.lattice` for the method.  The lattice is the
equal-jump risk-neutral ("Jarrow-Rudd risk-neutral") binomial tree in log
price, whose nodes drift with the risk-neutral log mean: its probabilities
stay in (0, 1) for any rate, dividend yield and volatility while the log step
is below 2, and the drift moves the nodes relative to the early-exercise
boundary from layer to layer, which keeps the error of the optimal-exercise
decision smooth in the step.
"""

from __future__ import annotations

import numpy as np

from grantval.pricing._lattice_layers import exit_payoff, narrow_expectation, vesting_expectation
from grantval.pricing.bsm import _bsm

#: half-width, in standard deviations of log price, of the vesting-date layer
_COVER = 6.0
#: share prices on the lattice are kept between the inverse of this and this
#: (far nodes only; avoids overflow and log of zero)
_PRICE_LIMIT = 1e300


def optimal_tree(s, k, t, r, sigma, q, v, lam, n_post, narrow=None):
    """Grant-date value (before pre-vesting exits) of options exercised when optimal.

    1-D arrays, no checks; ``0 <= v < t``.  The lattice runs from the vesting
    date to expiry with step ``(t - v) / n_post``; its vesting-date layer is
    as wide as needed to cover the vesting-date share price, and the option
    value at the grant date is the discounted expectation over that layer
    (:func:`~grantval.pricing._lattice_layers.vesting_expectation`), or where ``narrow`` (a vesting-date
    law narrower than the nodes) from a parabola through three nodes
    (:func:`~grantval.pricing._lattice_layers.narrow_expectation`).
    """
    narrow = np.zeros(len(s), dtype=bool) if narrow is None else narrow
    dt = (t - v) / n_post
    sq = sigma * np.sqrt(dt)
    drift = (r - q - 0.5 * sigma**2) * dt
    log_u, log_d = drift + sq, drift - sq
    p = (np.exp((r - q) * dt) - np.exp(log_d)) / (np.exp(log_u) - np.exp(log_d))
    disc = np.exp(-r * dt)
    a_up, a_down = (disc * p)[:, None], (disc * (1.0 - p))[:, None]
    exit_p = (-np.expm1(-lam * dt))[:, None]
    inv_d = np.exp(-log_d)[:, None]
    kcol, cell = k[:, None], sq[:, None]  # two layers together cover levels sq apart

    # index of the vesting-date layer: a virtual root that many steps earlier
    vests = v > 0
    # (at least layer 2: three nodes, for the parabola of a narrow vesting-date law)
    vest_layer = np.maximum(np.ceil(_COVER * np.sqrt(v / dt)), 2.0)
    vest_layer = np.where(narrow, 2.0 * np.ceil(vest_layer / 2.0), vest_layer)  # even: a node at the log mean
    vest_layer = np.where(vests, vest_layer, 0.0).astype(np.int64)
    mu = np.log(s) + (r - q - 0.5 * sigma**2) * v  # log mean at vesting
    log_root = mu - vest_layer * drift
    last = vest_layer + n_post - 1  # layer valued with BSM over the final step
    top, stop = int(last.max()), int(vest_layer.min())
    nodes = np.arange(top + 1)
    log_top = log_root[:, None] + top * drift[:, None] + (2 * nodes - top) * sq[:, None]
    log_limit = np.log(_PRICE_LIMIT)
    # prices of a layer follow from the next layer's by one division by d; where the
    # lattice reaches beyond the float range they are recomputed from logs each layer
    from_logs = bool(np.abs(log_top).max() > log_limit)
    stock = np.exp(np.clip(log_top, -log_limit, log_limit))
    value = np.zeros_like(stock)
    cont = np.zeros_like(stock)  # rows not yet started hold zeros, never garbage
    work = np.empty_like(stock)
    result = np.zeros_like(s)
    any_exit = bool(np.any(lam > 0))
    for j in range(top, stop - 1, -1):
        w = j + 1
        c, x, st = cont[:, :w], work[:, :w], stock[:, :w]
        if j < top:
            np.multiply(a_up, value[:, 1 : w + 1], out=c)
            np.multiply(a_down, value[:, :w], out=x)
            c += x
        init = last == j
        if np.any(init):
            c[init] = _bsm(st[init], kcol[init], dt[init, None], r[init, None],
                           sigma[init, None], q[init, None], True)
        np.subtract(st, kcol, out=x)
        np.maximum(x, 0.0, out=x)  # intrinsic value
        # leavers exercise if in the money: hold = cont + exit_p * (exit value - cont)
        hold = c + exit_p * (exit_payoff(st, kcol, cell) - c) if any_exit else c
        after = np.maximum(hold, x)
        value[:, :w] = after
        here = vest_layer == j
        if np.any(here):
            h = here & vests
            if np.any(h):
                sd = sigma[h] * np.sqrt(v[h])
                fwd = s[h] * np.exp((r[h] - q[h]) * v[h])
                lin = vesting_expectation(st[h], hold[h], after[h], k[h], np.ones(int(h.sum()), bool), mu[h], sd,
                                          fwd)
                c = slice(j // 2 - 1, j // 2 + 2) if j % 2 == 0 else slice(j // 2, j // 2 + 3)  # nearest mu
                smooth = np.all(hold[h][:, c] > st[h][:, c] - kcol[h], axis=1)  # no exercise among the three
                par = narrow_expectation(st[h][:, c], after[h][:, c], mu[h], sd, narrow[h] & smooth)
                result[h] = np.where(np.isnan(par), lin, par) * np.exp(-r[h] * v[h])
            result[here & ~vests] = after[here & ~vests, 0]
        if j > stop and from_logs:
            logs = log_root[:, None] + (j - 1) * drift[:, None] + (2 * nodes[:j] - (j - 1)) * sq[:, None]
            stock[:, :j] = np.exp(np.clip(logs, -log_limit, log_limit))
        elif j > stop:
            np.multiply(st, inv_d, out=st)
    return result
