"""Node-level pieces of the employee-option lattice (private to :mod:`grantval.pricing.lattice`).

Everything here works on the fixed log-price levels of the trinomial lattice:
the step parameters, the leaver's exercise value averaged over a node's cell,
the expectation of the vesting-date value against the lognormal law, and the
interpolation of the grant-date value when the share price is not a node.
"""

from __future__ import annotations

import numpy as np
from scipy.special import ndtr

#: share ``pu + pd`` of the two moving branches when the drift is small (the
#: value 1/3 also matches the fourth moment of the normal law)
_MOVE_SHARE = 1.0 / 3.0


def step_parameters(r, q, sigma, dt):
    """Level spacing and branch probabilities of one lattice step.

    The log price moves by ``+dx``, 0 or ``-dx``.  The spacing is chosen so that
    ``(pu + pd) dx**2`` is the second moment of the log step, and ``pu``, ``pd``
    are solved so that the discounted share price is exactly a martingale
    (``pu e^dx + pm + pd e^-dx = e^{(r-q) dt}``).  When the drift dominates the
    volatility the share of moving branches rises towards 1 so that all three
    probabilities stay in [0, 1].

    Returns
    -------
    dx, pu, pm, pd : ndarray
        Log spacing and probabilities (each shaped like the inputs).
    """
    nu = r - q - 0.5 * sigma**2
    second = sigma**2 * dt + (nu * dt) ** 2
    drift_share = np.abs(nu) * dt / np.sqrt(second)
    share = np.maximum(_MOVE_SHARE, (0.5 * (1.0 + drift_share)) ** 2)
    dx = np.sqrt(second / share)
    growth = np.expm1((r - q) * dt)
    pu = (growth - share * np.expm1(-dx)) / (2.0 * np.sinh(dx))
    pd = share - pu
    return dx, pu, 1.0 - share, pd


def exit_payoff(stock, k, dx):
    """Exercise value of a leaver, ``max(S - K, 0)`` averaged over each node's cell.

    The average is taken with the hat function of half-width ``dx`` in log price
    centred on the node (closed form).  Sampling the kinked payoff at the nodes
    instead makes the value jump as the strike moves between levels when the
    step count changes; the cell average keeps the error smooth in the step.

    Parameters
    ----------
    stock : ndarray (options, levels)
        Share price at the levels, currency per share.
    k, dx : ndarray (options, 1)
        Strike (currency per share) and log spacing.
    """
    ratio = (np.sinh(0.5 * dx) / (0.5 * dx)) ** 2  # hat average of e^y
    value = np.maximum(stock * ratio - k, 0.0)  # exact for cells wholly above or below the strike
    grow = np.exp(dx)
    near = np.nonzero((stock * grow > k) & (stock < k * grow))
    if near[0].size:
        h, kk = np.broadcast_to(dx, stock.shape), np.broadcast_to(k, stock.shape)
        value[near] = _cell_across_strike(stock[near], kk[near], h[near])
    return np.minimum(value, stock)


def _cell_across_strike(stock, k, h):
    """Hat average of ``max(S e^y - K, 0)`` over ``|y| < h`` for cells the strike cuts (closed form)."""
    kappa = np.clip(np.log(k / stock), -h, h)  # log distance to the strike
    neg = np.minimum(kappa, 0.0)
    pos = np.maximum(kappa, 0.0)
    # integral of (h -+ y) (S e^y - K) over [neg, 0] and [pos, h], divided by h^2
    left = stock * ((h - 1.0) - np.exp(neg) * (h + neg - 1.0)) + k * (h * neg + 0.5 * neg**2)
    right = stock * (np.exp(h) - np.exp(pos) * (h - pos + 1.0)) - k * (0.5 * h**2 - h * pos + 0.5 * pos**2)
    return np.maximum((left + right) / h**2, 0.0)


def vesting_expectation(stock, hold, after, k, optimal, mu, sd, fwd):
    """Expected vesting-date value of options whose value is known on nodes.

    The value at vesting is ``max(S - K, H(S))`` (exercise when optimal) or
    ``S - K`` at and above the barrier and ``H(S)`` below it, where ``H`` is
    the holding value on the nodes.  Values are interpolated linearly between
    nodes; for optimal exercise the boundary is located exactly where the
    holding line crosses ``S - K``, and for a barrier (which lies on a node)
    the node values ``after`` are used as they are.  Each linear piece is
    integrated in closed form against the lognormal law of the vesting-date
    share price (log mean ``mu``, log standard deviation ``sd``, mean
    ``fwd``).  Above the top node the value continues with slope one; below
    the bottom node it is taken as zero.  Integrating across the kink exactly,
    instead of rolling it back through a tree, removes the saw-tooth error a
    kink at the vesting date otherwise causes.
    """
    opt = optimal[:, None]
    line = np.where(opt, hold, after)
    a, b = stock[:, :-1], stock[:, 1:]
    ha, hb = line[:, :-1], line[:, 1:]
    kc = k[:, None]
    ga, gb = ha - (a - kc), hb - (b - kc)  # holding minus exercise at both ends
    cross = (ga > 0) != (gb > 0)
    with np.errstate(divide="ignore", invalid="ignore"):
        m_opt = np.where(cross, a + ga / (ga - gb) * (b - a), np.where(ga > 0, b, a))
        slope_h = (hb - ha) / (b - a)
    m = np.where(opt, m_opt, b)
    left_hold = np.where(opt, ga > 0, True)
    right_hold = np.where(opt, np.where(cross, ~(ga > 0), gb > 0), True)
    alpha_h = ha - slope_h * a
    alpha_l = np.where(left_hold, alpha_h, -kc)
    beta_l = np.where(left_hold, slope_h, 1.0)
    alpha_r = np.where(right_hold, alpha_h, -kc)
    beta_r = np.where(right_hold, slope_h, 1.0)
    s_, f_ = sd[:, None], fwd[:, None]
    z = lambda x: (np.log(x) - mu[:, None]) / s_  # noqa: E731
    za, zm, zb = z(a), z(m), z(b)
    p_l, p_r = ndtr(zm) - ndtr(za), ndtr(zb) - ndtr(zm)
    x_l = f_ * (ndtr(zm - s_) - ndtr(za - s_))
    x_r = f_ * (ndtr(zb - s_) - ndtr(zm - s_))
    total = (alpha_l * p_l + beta_l * x_l + alpha_r * p_r + beta_r * x_r).sum(axis=1)
    top_s, top_v = stock[:, -1], after[:, -1]
    zt = (np.log(top_s) - mu) / sd
    return total + (top_v - top_s) * ndtr(-zt) + fwd * ndtr(sd - zt)


#: a vesting-date law is narrow when its log standard deviation is below this many times
#: ``sigma sqrt(dt)`` of the finer lattice: its vesting value is then taken from a parabola through
#: three nodes instead of linear pieces, on both lattices of the extrapolation alike
NARROW = 1.5


def narrow_expectation(stock3, value3, mu, sd, use):
    """Vesting-date expectation from a parabola in log price through three neighbouring nodes.

    When the vesting-date law is narrower than the node spacing, linear pieces put a kink where
    most of the probability lies (an error of about ``V'' h sd``, ``h`` the spacing); the parabola
    through the node nearest the log mean and its two neighbours is exact to second order.  Its
    expectation over the normal law ``N(mu, sd^2)`` of the log price is ``a + b m + c (m^2 + sd^2)``
    with ``m`` = ``mu`` less the middle node's log price.

    Parameters
    ----------
    stock3, value3 : ndarray, shape (n, 3)
        Share prices (currency) and values (currency) at the three nodes, evenly spaced in log price.
    mu, sd : ndarray
        Log mean and log standard deviation of the vesting-date share price.
    use : ndarray of bool
        Where to apply it: a narrow law (:data:`NARROW`) and no kink among the three nodes (an
        exercise), where the parabola does not apply.

    Returns
    -------
    ndarray
        The expectation, NaN where it is not used (``use`` False, or a value that is not finite).
    """
    usable = use & np.all(np.isfinite(value3), axis=1)
    if not np.any(usable):
        return np.full(len(sd), np.nan)
    spacing = np.log(stock3[:, 2] / stock3[:, 1])
    a = value3[:, 1]
    b = (value3[:, 2] - value3[:, 0]) / (2.0 * spacing)
    c = (value3[:, 2] - 2.0 * value3[:, 1] + value3[:, 0]) / (2.0 * spacing**2)
    m = mu - np.log(stock3[:, 1])
    return np.where(usable, a + b * m + c * (m**2 + sd**2), np.nan)


def interpolate_at(values, u, top_level, centre):
    """Cubic Lagrange interpolation of node values at fractional level ``u``.

    ``values[:, centre + l]`` is the value at level ``l``; the four-node stencil
    around ``u`` is moved down so that it never uses a level above
    ``top_level`` (the barrier, above which the value has a kink).
    """
    base = np.floor(u).astype(np.int64) - 1
    base = np.minimum(base, top_level - 3)
    rows = np.arange(values.shape[0])
    x = u - base
    out = np.zeros(values.shape[0])
    for i in range(4):
        w = np.ones_like(x)
        for j in range(4):
            if j != i:
                w *= (x - j) / (i - j)
        out += w * values[rows, centre + base + i]
    return out


def up_and_out_call(s, k, h, tau, r, q, sigma, rebate):
    """Up-and-out call with ``rebate`` paid at the hit (Reiner and Rubinstein 1991).

    Closed form for ``s < h``, ``k <= h``, ``tau > 0`` (arrays broadcast), as in
    Haug, The Complete Guide to Option Pricing Formulas, 2nd ed., 4.17.1.  It
    serves as a smooth guide for interpolating lattice values between levels;
    NaN where the formula does not apply (``(mu^2 + 2 r / sigma^2) < 0``).
    """
    vt = sigma * np.sqrt(tau)
    mu = (r - q - 0.5 * sigma**2) / sigma**2
    with np.errstate(invalid="ignore", over="ignore", divide="ignore"):
        lam = np.sqrt(mu**2 + 2.0 * r / sigma**2)
        x1 = np.log(s / k) / vt + (1 + mu) * vt
        x2 = np.log(s / h) / vt + (1 + mu) * vt
        y1 = np.log(h**2 / (s * k)) / vt + (1 + mu) * vt
        y2 = np.log(h / s) / vt + (1 + mu) * vt
        z = np.log(h / s) / vt + lam * vt
        fs, fk, hs = s * np.exp(-q * tau), k * np.exp(-r * tau), h / s
        a_ = fs * ndtr(x1) - fk * ndtr(x1 - vt)
        b_ = fs * ndtr(x2) - fk * ndtr(x2 - vt)
        c_ = fs * hs ** (2 * (mu + 1)) * ndtr(-y1) - fk * hs ** (2 * mu) * ndtr(-y1 + vt)
        d_ = fs * hs ** (2 * (mu + 1)) * ndtr(-y2) - fk * hs ** (2 * mu) * ndtr(-y2 + vt)
        f_ = rebate * (hs ** (mu + lam) * ndtr(-z) + hs ** (mu - lam) * ndtr(-z + 2 * lam * vt))
        return a_ - b_ + c_ - d_ + f_
