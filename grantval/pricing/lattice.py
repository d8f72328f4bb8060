"""Binomial lattice for employee share options.

The lattice values a call that cannot be exercised before its vesting date,
whose holder may leave employment (forfeiting before vesting, exercising if in
the money after it) and may exercise voluntarily once the share price reaches
a multiple of the strike (Hull and White, 2004, "How to value employee stock
options", Financial Analysts Journal 60(1)).

Numerical method (all vectorised over a batch of options):

- a recombining binomial tree in log price with risk-neutral probabilities
  (the equal-jump "Jarrow-Rudd risk-neutral" tree, whose probabilities stay in
  (0, 1) for any rate, dividend yield and volatility);
- the time step of each option is chosen so that its vesting date falls on a
  layer of the tree, so the exercise window opens exactly at vesting;
- the layer before expiry uses the Black-Scholes-Merton value over the time
  left (Broadie and Detemple, 1996, "American option valuation", Review of
  Financial Studies 9(4): the "BBS" smoothing);
- the result is Richardson-extrapolated from ``steps`` and ``steps // 2``
  ("BBSR" in Broadie and Detemple).
"""

from __future__ import annotations

import numpy as np

from grantval.errors import InputError
from grantval.pricing._inputs import FINITE, NAN_ALLOWED, NON_NEGATIVE, POSITIVE, finish, prepare
from scipy.special import ndtr

from grantval.pricing.bsm import _bsm

#: total time steps used when ``steps`` is None; with Richardson extrapolation
#: this meets the accuracy documented in DEVELOPERS.md (see tests/pricing/test_lattice.py).
DEFAULT_STEPS = 256
#: smallest accepted explicit ``steps`` (the extrapolation needs steps // 2 >= 2)
MIN_STEPS = 4
#: options valued per block, to keep the working arrays in cache
_BLOCK = 512


#: half-width, in standard deviations of log price, of the vesting-date layer
_COVER = 6.0


def _vesting_expectation(stock, hold, after, k, barrier, optimal, mu, sd, fwd):
    """Expected vesting-date value of options whose value function is known on nodes.

    The value at vesting is ``max(S - K, H(S))`` (exercise when optimal) or
    ``S - K`` above the barrier and ``H(S)`` below it, where ``H`` is the
    holding value on the nodes.  ``H`` is interpolated linearly between nodes,
    the exercise boundary is located exactly on the interpolant, and each
    linear piece is integrated in closed form against the lognormal law of the
    vesting-date share price (log mean ``mu``, log standard deviation ``sd``,
    mean ``fwd``).  Integrating across the kink exactly, instead of rolling it
    back through a tree, removes the saw-tooth error that a kink at the
    vesting date otherwise causes, so Richardson extrapolation works.
    """
    a, b = stock[:, :-1], stock[:, 1:]
    ha, hb = hold[:, :-1], hold[:, 1:]
    kc = k[:, None]
    # value of the exercise branch and of the holding branch at both ends
    ea, eb = a - kc, b - kc
    opt = optimal[:, None]
    bar = barrier[:, None]
    # optimal exercise: split where the holding line crosses S - K
    ga, gb = ha - ea, hb - eb
    cross = (ga > 0) != (gb > 0)
    with np.errstate(divide="ignore", invalid="ignore"):
        m_opt = np.where(cross, a + ga / (ga - gb) * (b - a), np.where(ga > 0, b, a))
    left_hold_opt = np.where(cross, ga > 0, True)  # when no crossing the whole piece is one branch
    whole_hold_opt = (ga > 0) & (gb > 0)
    whole_ex_opt = (ga <= 0) & (gb <= 0)
    # barrier exercise: split at the barrier, holding line pinned to B - K there
    m_bar = np.clip(bar, a, b)
    # assemble: left piece [a, m] and right piece [m, b], each alpha + beta S
    m = np.where(opt, m_opt, m_bar)
    # holding line on the left piece
    with np.errstate(divide="ignore", invalid="ignore"):
        slope_h = (hb - ha) / (b - a)
        straddle = (bar > a) & (bar < b)
        bar_end = np.where(straddle, (bar - kc - ha) / (bar - a), slope_h)
    beta_hold_left = np.where(opt, slope_h, bar_end)
    alpha_hold_left = ha - beta_hold_left * a
    left_is_hold = np.where(opt, np.where(whole_ex_opt, False, np.where(whole_hold_opt, True, left_hold_opt)), True)
    right_is_hold = np.where(opt, np.where(whole_ex_opt, False, np.where(whole_hold_opt, True, ~left_hold_opt)), False)
    # optimal, holding on the right after a crossing: the holding line itself
    alpha_l = np.where(left_is_hold, alpha_hold_left, -kc)
    beta_l = np.where(left_is_hold, beta_hold_left, 1.0)
    alpha_r = np.where(right_is_hold, ha - slope_h * a, -kc)
    beta_r = np.where(right_is_hold, slope_h, 1.0)
    # a barrier piece with m == b has no right part; with m == a no left part
    z = lambda x: (np.log(x) - mu[:, None]) / sd[:, None]  # noqa: E731
    za, zm, zb = z(a), z(m), z(b)
    s_ = sd[:, None]
    f_ = fwd[:, None]
    p_l = ndtr(zm) - ndtr(za)
    p_r = ndtr(zb) - ndtr(zm)
    x_l = f_ * (ndtr(zm - s_) - ndtr(za - s_))
    x_r = f_ * (ndtr(zb - s_) - ndtr(zm - s_))
    total = (alpha_l * p_l + beta_l * x_l + alpha_r * p_r + beta_r * x_r).sum(axis=1)
    # above the top node: continue with slope one from the top value
    top_s, top_v = stock[:, -1], after[:, -1]
    zt = (np.log(top_s) - mu) / sd
    total += (top_v - top_s) * ndtr(-zt) + fwd * ndtr(sd - zt)
    return total


def _one_tree(s, k, t, r, sigma, q, v, barrier, optimal, lam, n_post):
    """Value options after vesting on a lattice of ``n_post`` steps (1-D arrays, no checks).

    ``0 <= v < t``; ``barrier`` is the voluntary exercise price level (inf
    where ``optimal``).  The lattice runs from the vesting date to expiry with
    step ``(t - v) / n_post``; its vesting-date layer is as wide as needed to
    cover the vesting-date share price, and the option value at the grant
    date is the discounted expectation over that layer
    (:func:`_vesting_expectation`).  Departures before vesting are applied by
    the caller.
    """
    dt = (t - v) / n_post
    sq = sigma * np.sqrt(dt)
    drift = (r - q - 0.5 * sigma**2) * dt
    log_u, log_d = drift + sq, drift - sq
    p = (np.exp((r - q) * dt) - np.exp(log_d)) / (np.exp(log_u) - np.exp(log_d))
    disc = np.exp(-r * dt)
    a_up, a_down = (disc * p)[:, None], (disc * (1.0 - p))[:, None]
    exit_p = (-np.expm1(-lam * dt))[:, None]
    inv_d = np.exp(-log_d)[:, None]
    kcol, bcol = k[:, None], barrier[:, None]
    opt_flag = optimal.astype(float)[:, None]

    # index of the vesting-date layer: a virtual root that many steps earlier
    vests = v > 0
    width = np.where(vests, np.ceil(_COVER * np.sqrt(v / dt)), 0.0)
    vest_layer = width.astype(np.int64)
    mu = np.log(s) + (r - q - 0.5 * sigma**2) * v  # log mean at vesting
    log_root = mu - vest_layer * drift
    last = vest_layer + n_post - 1  # layer valued with BSM over the final step

    top = int(last.max())
    stop = int(vest_layer.min())
    nodes = np.arange(top + 1)
    stock = np.exp(log_root[:, None] + top * drift[:, None] + (2 * nodes - top) * sq[:, None])
    value = np.zeros_like(stock)
    cont = np.zeros_like(stock)  # rows not yet started hold zeros, never garbage
    work = np.empty_like(stock)
    result = np.zeros_like(s)
    all_optimal = bool(np.all(optimal))
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
        # leavers exercise if in the money: hold = cont + exit_p * (intrinsic - cont)
        hold = c + exit_p * (x - c) if any_exit else c
        if all_optimal:
            after = np.maximum(hold, x)
        else:
            after = np.where(st >= bcol, st - kcol, hold)
            after = np.maximum(after, x * opt_flag)
        value[:, :w] = after
        here = vest_layer == j
        if np.any(here):
            h = here & vests
            if np.any(h):
                sd = sigma[h] * np.sqrt(v[h])
                fwd = s[h] * np.exp((r[h] - q[h]) * v[h])
                result[h] = _vesting_expectation(
                    st[h], hold[h], after[h], k[h], barrier[h], optimal[h], mu[h], sd, fwd
                ) * np.exp(-r[h] * v[h])
            result[here & ~vests] = after[here & ~vests, 0]
        if j > stop:
            np.multiply(st, inv_d, out=st)
    return result


def _lattice(s, k, t, r, sigma, q, v, mult, lam, lam_pre, steps):
    """Employee option lattice on 1-D float arrays (no checks); see :func:`lattice_value`."""
    out = np.empty_like(s)
    optimal = np.isnan(mult)
    barrier = np.where(optimal, np.inf, mult * k)
    european = v >= t
    if np.any(european):
        e = european
        out[e] = _bsm(s[e], k[e], t[e], r[e], sigma[e], q[e], True) * np.exp(-lam_pre[e] * t[e])
    rows = np.flatnonzero(~european)
    if rows.size == 0:
        return out
    tr, vr = t[rows], v[rows]
    # post-vesting steps in proportion to the post-vesting life; even, so the
    # coarse lattice of the extrapolation has exactly twice the step
    n_post = np.zeros(s.shape, dtype=np.int64)
    n_post[rows] = 2 * np.maximum(1, np.rint(steps * (tr - vr) / (2 * tr))).astype(np.int64)
    # group options of similar lattice size so that a block wastes little work
    size = np.ceil(_COVER * np.sqrt(vr * n_post[rows] / (tr - vr))) + n_post[rows]
    rows = rows[np.argsort(size, kind="stable")]
    for start in range(0, rows.size, _BLOCK):
        idx = rows[start : start + _BLOCK]
        args = (s[idx], k[idx], t[idx], r[idx], sigma[idx], q[idx], v[idx],
                barrier[idx], optimal[idx], lam[idx])
        fine = _one_tree(*args, n_post[idx])
        coarse = _one_tree(*args, n_post[idx] // 2)
        out[idx] = (2.0 * fine - coarse) * np.exp(-lam_pre[idx] * v[idx])
    return out


def lattice_value(
    share_price,
    strike,
    term,
    rate,
    volatility,
    dividend_yield=0.0,
    *,
    vesting=0.0,
    exercise_multiple=None,
    exit_rate=0.0,
    pre_vest_exit_rate=0.0,
    steps=None,
):
    """Value of an employee call option on a binomial lattice.

    Parameters
    ----------
    share_price : array_like
        Share price at the grant date, currency per share, > 0.
    strike : array_like
        Exercise price, currency per share, > 0.
    term : array_like
        Contractual term in years (grant date to expiration), >= 0.
    rate : array_like
        Risk-free rate, continuously compounded decimal per year.
    volatility : array_like
        Volatility, decimal per square-root year, > 0.
    dividend_yield : array_like, optional
        Continuous dividend yield, decimal per year, >= 0.
    vesting : array_like, optional
        Years from the grant date until the option may first be exercised,
        between 0 and ``term``.  No exercise happens before it.
    exercise_multiple : None or array_like, optional
        Suboptimal exercise factor: after vesting the holder exercises as soon
        as the share price reaches ``exercise_multiple * strike`` (>= 1).
        None (or NaN elements of an array) means the holder exercises only
        when it is optimal, as for an American option.
    exit_rate : array_like, optional
        Rate per year at which vested holders leave employment (Poisson
        intensity, >= 0).  A leaver exercises if in the money; otherwise the
        option lapses.
    pre_vest_exit_rate : array_like, optional
        Rate per year of departures before vesting, which forfeit the option.
        Keep 0 for ASC 718 / IFRS 2 grant-date fair values: service-condition
        forfeitures belong in expense attribution, not in the fair value.
    steps : int, optional
        Total number of time steps of the finer of the two lattices that are
        extrapolated.  Default :data:`DEFAULT_STEPS`.

    Returns
    -------
    float or ndarray
        Value per option; a float when every input is a scalar.

    Raises
    ------
    InputError
        (a :class:`ValueError`) naming the first invalid argument.
    """
    (s, k, t, r, sigma, q, v, mult, lam, lam_pre), scalar = prepare(
        share_price=(share_price, (POSITIVE,)),
        strike=(strike, (POSITIVE,)),
        term=(term, (NON_NEGATIVE,)),
        rate=(rate, (FINITE,)),
        volatility=(volatility, (POSITIVE,)),
        dividend_yield=(dividend_yield, (NON_NEGATIVE,)),
        vesting=(vesting, (NON_NEGATIVE,)),
        exercise_multiple=(
            np.nan if exercise_multiple is None else exercise_multiple,
            (NAN_ALLOWED, (lambda a: a >= 1, "at least 1 (or None)")),
        ),
        exit_rate=(exit_rate, (NON_NEGATIVE,)),
        pre_vest_exit_rate=(pre_vest_exit_rate, (NON_NEGATIVE,)),
    )
    if np.any(v > t):
        bad = np.ravel(v[v > t])[0]
        raise InputError(f"vesting must not exceed term; got vesting {float(bad)!r} beyond the term")
    if steps is None:
        n = DEFAULT_STEPS
    else:
        if int(steps) != steps or steps < MIN_STEPS:
            raise InputError(f"steps must be a whole number of at least {MIN_STEPS}; got {steps!r}")
        n = int(steps)
    shape = s.shape
    flat = [np.ravel(a) for a in (s, k, t, r, sigma, q, v, mult, lam, lam_pre)]
    return finish(_lattice(*flat, n).reshape(shape), scalar)
