"""Fine finite-difference solver of the employee-option model (test-only reference).

Solves, on a uniform grid in ``x = ln S`` from the vesting date to expiry,

    V_t + sigma^2/2 V_xx + (r - q - sigma^2/2) V_x - (r + lam) V + lam (e^x - K)^+ = 0,

with ``V(T) = (e^x - K)^+``; after vesting either ``V >= e^x - K`` (exercise
when optimal, by projection after each step) or ``V = B - K`` at the barrier
``B = M K`` (the top of the grid, a node).  Time stepping is Crank-Nicolson
with four fully implicit half steps first (Rannacher 1984, "Finite element
solution of diffusion problems with irregular data", Numer. Math. 43).  The
grant-date value is the vesting-date value integrated against the lognormal
law (trapezoid rule on the grid, closed form above the barrier), or the value
interpolated at the share price when there is no vesting period.  The model
is that of Hull and White (2004); the solver is independent of the lattice.
"""

from __future__ import annotations

import numpy as np
from scipy.interpolate import CubicSpline
from scipy.linalg import solve_banded
from scipy.special import ndtr


def _grid(s, t, v, r, q, sigma, barrier, n_space):
    mu = np.log(s) + (r - q - 0.5 * sigma**2) * v
    half = 10.0 * sigma * np.sqrt(t) + abs(r - q) * t
    lo, hi = mu - half, mu + half
    if np.isfinite(barrier):
        hi = np.log(barrier)
        lo = min(lo, hi - 1.0)
    return np.linspace(lo, hi, n_space), mu


def _operator(x, r, q, sigma, lam):
    dx = x[1] - x[0]
    nu = r - q - 0.5 * sigma**2
    lower = 0.5 * sigma**2 / dx**2 - 0.5 * nu / dx
    upper = 0.5 * sigma**2 / dx**2 + 0.5 * nu / dx
    diag = -sigma**2 / dx**2 - (r + lam)
    return lower, diag, upper


def _step(v_old, x, k, dt, theta, coeffs, lam, top_value):
    """One theta-scheme step backward in time; Dirichlet values at both ends."""
    lower, diag, upper = coeffs
    n = x.size
    src = lam * np.maximum(np.exp(x) - k, 0.0)
    rhs = v_old.copy()
    inner = slice(1, n - 1)
    explicit = lower * v_old[:-2] + diag * v_old[1:-1] + upper * v_old[2:]
    rhs[inner] = v_old[1:-1] + (1 - theta) * dt * explicit + dt * src[1:-1]
    ab = np.zeros((3, n))
    ab[1, :] = 1.0
    ab[1, 1:-1] = 1.0 - theta * dt * diag
    ab[0, 2:] = -theta * dt * upper
    ab[2, :-2] = -theta * dt * lower
    rhs[0], rhs[-1] = 0.0, top_value
    return solve_banded((1, 1), ab, rhs)


def fd_value(s, k, t, v, r, q, sigma, mult=None, lam=0.0, n_space=2001, n_time=2000):
    """Grant-date value per option (no pre-vesting exits); ``mult`` None means optimal exercise."""
    barrier = np.inf if mult is None else mult * k
    if v == 0 and s >= barrier:
        return s - k
    x, mu = _grid(s, t, v, r, q, sigma, barrier, n_space)
    stock = np.exp(x)
    exercise = stock - k
    value = np.maximum(exercise, 0.0)
    tau_total = t - v
    dt = tau_total / n_time
    coeffs = _operator(x, r, q, sigma, lam)
    tau = 0.0
    schedule = [(0.5 * dt, 1.0)] * 4 + [(dt, 0.5)] * (n_time - 2)
    for h, theta in schedule:
        tau += h
        if np.isfinite(barrier):
            top = barrier - k
        else:
            top = max(stock[-1] * np.exp(-q * tau) - k * np.exp(-r * tau), stock[-1] - k)
        value = _step(value, x, k, h, theta, coeffs, lam, top)
        if not np.isfinite(barrier):
            value = np.maximum(value, exercise)
    if v == 0:
        return float(CubicSpline(x, value)(np.log(s)))
    sd = sigma * np.sqrt(v)
    z = (x - mu) / sd
    dens = np.exp(-0.5 * z**2) / (np.sqrt(2 * np.pi) * sd)
    f = value * dens
    total = np.sum(0.5 * (f[1:] + f[:-1]) * np.diff(x))
    zt = z[-1]
    fwd = s * np.exp((r - q) * v)
    # above the grid: S - K (barrier exercise, or deep in the money)
    total += fwd * ndtr(sd - zt) - k * ndtr(-zt)
    return float(np.exp(-r * v) * total)
