"""Continuous-barrier reference values of the employee option with an exercise multiple.

With an exercise multiple ``M`` and no vesting period left, the holder of the
model (Hull and White 2004) exercises when the share price first reaches
``B = M K``, or when leaving employment (intensity ``lam``, exercising if in
the money), or at expiry.  In the continuous-time limit that is:

- an up-and-out call on ``[0, tau]`` with rebate ``B - K`` paid at the hit,
  discounted at ``r + lam`` with dividend yield ``q + lam`` (same drift, the
  survival factor ``exp(-lam u)`` folded into the discount), plus
- ``lam * int_0^tau UOC(u) du``: a leaver at ``u`` receives the up-and-out
  call (no rebate) expiring at ``u``.

The up-and-out call is the closed form of Reiner and Rubinstein (1991,
"Breaking down the barriers", Risk 4(8)), written in numpy here as in Haug,
The Complete Guide to Option Pricing Formulas, 2nd ed., section 4.17.1, and
checked against QuantLib's AnalyticBarrierEngine in test_lattice_multiple.py.
The grant-date value with a vesting period ``v`` integrates the vesting-date
value against the lognormal law (Gauss-Legendre below the barrier, closed form
above it, where the value is ``S - K``).
"""

from __future__ import annotations

import numpy as np
from scipy.special import ndtr


def uoc(s, k, h, tau, r, q, sigma, rebate=0.0):
    """Up-and-out call (strike ``k`` <= barrier ``h``, spot ``s`` < ``h``), rebate at the hit.

    Reiner-Rubinstein closed form; arrays broadcast; ``tau > 0``.
    """
    s, k, h, tau, r, q, sigma, rebate = np.broadcast_arrays(*(np.asarray(a, float) for a in
                                                              (s, k, h, tau, r, q, sigma, rebate)))
    b = r - q
    vt = sigma * np.sqrt(tau)
    mu = (b - 0.5 * sigma**2) / sigma**2
    lam = np.sqrt(mu**2 + 2.0 * r / sigma**2)
    x1 = np.log(s / k) / vt + (1 + mu) * vt
    x2 = np.log(s / h) / vt + (1 + mu) * vt
    y1 = np.log(h**2 / (s * k)) / vt + (1 + mu) * vt
    y2 = np.log(h / s) / vt + (1 + mu) * vt
    z = np.log(h / s) / vt + lam * vt
    fs, fk = s * np.exp((b - r) * tau), k * np.exp(-r * tau)
    hs = h / s
    a_ = fs * ndtr(x1) - fk * ndtr(x1 - vt)
    b_ = fs * ndtr(x2) - fk * ndtr(x2 - vt)
    c_ = fs * hs ** (2 * (mu + 1)) * ndtr(-y1) - fk * hs ** (2 * mu) * ndtr(-y1 + vt)
    d_ = fs * hs ** (2 * (mu + 1)) * ndtr(-y2) - fk * hs ** (2 * mu) * ndtr(-y2 + vt)
    f_ = rebate * (hs ** (mu + lam) * ndtr(-z) + hs ** (mu - lam) * ndtr(-z + 2 * lam * vt))
    return a_ - b_ + c_ - d_ + f_


def _gauss(n, lo, hi):
    x, w = np.polynomial.legendre.leggauss(n)
    return 0.5 * (hi - lo) * x + 0.5 * (hi + lo), 0.5 * (hi - lo) * w


def post_vesting_value(x, k, barrier, tau, r, q, sigma, lam, n_time=96):
    """Value at the vesting date for share prices ``x`` below the barrier (1-D)."""
    x = np.asarray(x, float)
    r2, q2 = r + lam, q + lam
    value = uoc(x, k, barrier, tau, r2, q2, sigma, rebate=barrier - k)
    if lam > 0:
        # u = tau w^2 removes the square-root behaviour of the integrand near u = 0
        w, wt = _gauss(n_time, 0.0, 1.0)
        u = tau * w**2
        inner = uoc(x[:, None], k, barrier, u[None, :], r2, q2, sigma)
        value = value + lam * (inner * (2 * tau * w * wt)[None, :]).sum(axis=1)
    return np.where(x >= barrier, x - k, value)


def employee_value(s, k, t, v, r, q, sigma, mult, lam, n_space=400):
    """Grant-date value of the option with exercise multiple ``mult`` (no pre-vesting exits)."""
    barrier = mult * k
    tau = t - v
    if v == 0:
        return float(post_vesting_value([s], k, barrier, tau, r, q, sigma, lam)[0]) if s < barrier else s - k
    sd = sigma * np.sqrt(v)
    mu = np.log(s) + (r - q - 0.5 * sigma**2) * v
    zb = (np.log(barrier) - mu) / sd
    z, wz = _gauss(n_space, min(-12.0, zb - 1.0), zb)
    dens = np.exp(-0.5 * z**2) / np.sqrt(2 * np.pi)
    below = (post_vesting_value(np.exp(mu + sd * z), k, barrier, tau, r, q, sigma, lam) * dens * wz).sum()
    fwd = s * np.exp((r - q) * v)
    above = fwd * ndtr(sd - zb) - k * ndtr(-zb)  # E[(S_v - K) 1{S_v >= B}]
    return float(np.exp(-r * v) * (below + above))
