"""Backward induction on the trinomial lattice used with an exercise multiple (private).

See :mod:`grantval.pricing.lattice` for the method; this module holds the
induction over one block of options with a given number of post-vesting steps.
"""

from __future__ import annotations

import numpy as np

from grantval.pricing._lattice_layers import (
    exit_payoff,
    interpolate_at,
    step_parameters,
    up_and_out_call,
    vesting_expectation,
)
from grantval.pricing.bsm import _bsm

#: half-width, in standard deviations of log price, of the vesting-date layer
_COVER = 6.0
#: levels each side of the centre kept when there is no vesting period and a
#: barrier (the grant-date value is interpolated on them)
_STENCIL = 4
#: largest |log price| kept on the lattice (levels beyond are clamped; they
#: carry no probability that matters and would overflow)
_LOG_LIMIT = 700.0


def _layout(s, v, sigma, q, r, barrier, optimal, dx):
    """Centre, barrier level and vesting-layer half-width of each option's lattice.

    Levels are ``centre + l * dx`` for whole ``l``.  With a barrier the centre
    is shifted (by less than half a level) so that the barrier is a level; the
    barrier's level number is returned (a huge number when exercise is optimal).
    """
    nu = r - q - 0.5 * sigma**2
    vests = v > 0
    anchor = np.where(vests, np.log(s) + nu * v, np.log(s))
    with np.errstate(invalid="ignore"):
        log_b = np.log(barrier)
        bar_level = np.where(optimal, 0.0, np.rint((log_b - anchor) / dx))
    centre = np.where(optimal, anchor, log_b - bar_level * dx)
    bar_level = np.where(optimal, 2**40, bar_level).astype(np.int64)
    width = np.ceil(_COVER * sigma * np.sqrt(v) / dx)
    width = np.where(vests, np.maximum(width, 1.0), np.where(optimal, 0.0, _STENCIL))
    return centre, bar_level, width.astype(np.int64)


def barrier_tree(s, k, t, r, sigma, q, v, barrier, optimal, lam, n_post):
    """Grant-date value (before pre-vesting exits) on a lattice of ``n_post`` steps after vesting.

    1-D arrays, no checks; ``0 <= v < t``; ``barrier`` is the voluntary
    exercise price (inf where ``optimal``) and, when ``v == 0``, above the
    share price.  Node ``i`` of layer ``j`` (layer 0 is a virtual root) is
    level ``i - j``; the vesting date is layer ``width`` and expiry layer
    ``width + n_post``.
    """
    dt = (t - v) / n_post
    dx, pu, pm, pd = step_parameters(r, q, sigma, dt)
    centre, bar_level, width = _layout(s, v, sigma, q, r, barrier, optimal, dx)
    disc = np.exp(-r * dt)
    cu, cm, cd = ((disc * p)[:, None] for p in (pu, pm, pd))
    exit_p = (-np.expm1(-lam * dt))[:, None]
    kcol = k[:, None]
    last = width + n_post - 1  # layer valued with BSM over the final step
    top, stop = int(last.max()), int(width.min())
    levels = np.arange(-top, top + 1)
    log_s = np.clip(centre[:, None] + levels * dx[:, None], -_LOG_LIMIT, _LOG_LIMIT)
    stock_all = np.exp(log_s)
    intrinsic_all = np.maximum(stock_all - kcol, 0.0)
    any_exit = bool(np.any(lam > 0))
    leave_all = exit_payoff(stock_all, kcol, dx[:, None]) if any_exit else None
    above_all = levels >= bar_level[:, None]
    any_barrier = not bool(np.all(optimal))
    opt_col = optimal[:, None]
    value = np.zeros_like(stock_all)
    cont, work = np.zeros_like(stock_all), np.empty_like(stock_all)
    result = np.zeros_like(s)
    with np.errstate(over="ignore", invalid="ignore"):
        for j in range(top, stop - 1, -1):
            w, cols = 2 * j + 1, slice(top - j, top + j + 1)
            c, x, st = cont[:, :w], work[:, :w], stock_all[:, cols]
            if j < top:
                np.multiply(cu, value[:, 2 : w + 2], out=c)
                np.multiply(cm, value[:, 1 : w + 1], out=x)
                c += x
                np.multiply(cd, value[:, :w], out=x)
                c += x
            init = last == j
            if np.any(init):
                c[init] = _bsm(st[init], kcol[init], dt[init, None], r[init, None],
                               sigma[init, None], q[init, None], True)
            hold = c + exit_p * (leave_all[:, cols] - c) if any_exit else c
            after = np.where(opt_col, np.maximum(hold, intrinsic_all[:, cols]), hold)
            if any_barrier:
                after = np.where(above_all[:, cols], st - kcol, after)
            value[:, :w] = after
            here = width == j
            if np.any(here):
                result[here] = _at_vesting(here, j, st, hold, after, s, k, t, r, sigma, q, v, lam,
                                           barrier, optimal, centre, dx, bar_level)
    return result


#: Gauss-Legendre points of the leavers' integral in the interpolation guide
_GUIDE_POINTS = 24


def _guide(x, k, barrier, tau, r, q, sigma, lam):
    """Continuous-barrier value below the barrier (rows of ``x``), the smooth guide of the interpolation.

    An up-and-out call with rebate ``B - K`` at the hit, discounted at
    ``r + lam`` with yield ``q + lam``, plus the leavers' integral
    ``lam * int_0^tau UOC(u) du`` (Gauss-Legendre in ``u = tau w^2``).
    """
    col = lambda a: a[:, None]  # noqa: E731
    r2, q2 = col(r + lam), col(q + lam)
    value = up_and_out_call(x, col(k), col(barrier), col(tau), r2, q2, col(sigma), col(barrier - k))
    if np.any(lam > 0):
        w, wt = np.polynomial.legendre.leggauss(_GUIDE_POINTS)
        w, wt = 0.5 * (w + 1.0), 0.5 * wt
        for wi, wti in zip(w, wt):
            u = col(tau) * wi**2
            part = up_and_out_call(x, col(k), col(barrier), u, r2, q2, col(sigma), 0.0)
            value = value + col(lam) * part * (2.0 * col(tau) * wi * wti)
    return value


def _interpolate_grant(after, st, s, k, t, r, sigma, q, lam, barrier, u, top_level, centre):
    """Grant-date value at a share price between levels (no vesting period, a barrier).

    The lattice values are interpolated after subtracting a smooth guide, the
    continuous-barrier value of the same option (:func:`_guide`), so that only
    the small, smooth discretisation error of the lattice is interpolated.
    """
    bcol = barrier[:, None]
    nodes = np.where(st < bcol, _guide(np.minimum(st, bcol), k, barrier, t, r, q, sigma, lam), st - k[:, None])
    at_s = _guide(s[:, None], k, barrier, t, r, q, sigma, lam)[:, 0]
    usable = np.all(np.isfinite(nodes), axis=1) & np.isfinite(at_s)
    nodes = np.where(usable[:, None], nodes, 0.0)
    at_s = np.where(usable, at_s, 0.0)
    return at_s + interpolate_at(after - nodes, u, top_level, centre)


def _at_vesting(here, j, st, hold, after, s, k, t, r, sigma, q, v, lam, barrier, optimal, centre, dx, bar_level):
    """Grant-date value of the options ``here`` whose vesting layer is layer ``j``."""
    out = np.empty(int(here.sum()))
    sub = np.flatnonzero(here)
    vests = v[sub] > 0
    h = sub[vests]
    if h.size:
        sd = sigma[h] * np.sqrt(v[h])
        mu = np.log(s[h]) + (r[h] - q[h] - 0.5 * sigma[h] ** 2) * v[h]
        fwd = s[h] * np.exp((r[h] - q[h]) * v[h])
        out[vests] = vesting_expectation(st[h], hold[h], after[h], k[h], optimal[h], mu, sd, fwd) * np.exp(
            -r[h] * v[h]
        )
    g = sub[~vests]
    if g.size:  # no vesting period: the share price is the centre level, or interpolated
        direct = after[g, j]
        bar = ~optimal[g]
        if np.any(bar):
            b = g[bar]
            direct[bar] = _interpolate_grant(after[b], st[b], s[b], k[b], t[b], r[b], sigma[b], q[b],
                                             lam[b], barrier[b], (np.log(s[b]) - centre[b]) / dx[b],
                                             np.minimum(bar_level[b], j), j)
        out[~vests] = direct
    return out
