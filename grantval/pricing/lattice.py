"""Binomial lattice for employee share options.

The lattice values a call that cannot be exercised before its vesting date,
whose holder may leave employment (forfeiting before vesting, exercising if in
the money after it) and may exercise voluntarily once the share price reaches
a multiple of the strike (Hull and White, 2004, "How to value employee stock
options", Financial Analysts Journal 60(1)).

Numerical method (all vectorised over a batch of options):

- exercise when optimal: a recombining binomial tree in log price with
  risk-neutral probabilities (the equal-jump "Jarrow-Rudd risk-neutral" tree),
  whose nodes drift from layer to layer relative to the exercise boundary;
- exercise at a multiple ``M``: a trinomial lattice on fixed log-price levels,
  shifted (by under half a level) so that the barrier ``M K`` is a level.  A
  walk that moves one level a step cannot jump over it, so the barrier is hit
  exactly and the error falls as 1/n.  Probabilities make the discounted share
  price a martingale and stay in [0, 1] for any drift;
- both lattices run from the vesting date to expiry; the vesting-date layer
  covers +-6 standard deviations of the vesting-date share price, and the
  grant-date value is its expectation integrated in closed form against the
  lognormal law (the exercise kink located exactly).  With no vesting period
  the grant date is the centre level (optimal exercise) or, with a barrier,
  the values are interpolated at the share price after subtracting the
  closed-form up-and-out call as a guide;
- a leaver's exercise value ``max(S - K, 0)`` is averaged over each node's
  cell in log price, so that the strike falling between levels does not make
  the value swing with the step count;
- the layer before expiry uses the Black-Scholes-Merton value over the time
  left (Broadie and Detemple, 1996, "American option valuation", Review of
  Financial Studies 9(4): the "BBS" smoothing);
- the result is Richardson-extrapolated from ``steps`` and ``steps // 2``
  ("BBSR" in Broadie and Detemple) and kept within the bounds the true value
  obeys (zero or the intrinsic value, and the share price).

Inputs with ``volatility * sqrt(term)`` above :data:`MAX_TOTAL_VOLATILITY` are
refused; ``steps`` runs from :data:`MIN_STEPS` to :data:`MAX_STEPS`.
"""

from __future__ import annotations

import numpy as np

from grantval.errors import InputError
from grantval.pricing._inputs import FINITE, NAN_ALLOWED, NON_NEGATIVE, POSITIVE, finish, prepare
from grantval.pricing._lattice_binomial import optimal_tree
from grantval.pricing._lattice_layers import NARROW
from grantval.pricing._lattice_tree import barrier_tree
from grantval.pricing.bsm import _bsm
from grantval.workers import ordered_map

#: total time steps used when ``steps`` is None; with Richardson extrapolation
#: this meets the accuracy documented in DEVELOPERS.md (see tests/pricing/test_lattice*.py).
DEFAULT_STEPS = 256
#: vesting periods shorter than this (years, about 0.4 day) are valued as no vesting period
MIN_VESTING = 1e-3
#: smallest accepted explicit ``steps`` (the extrapolation needs steps // 2 >= 2)
MIN_STEPS = 4
#: largest accepted explicit ``steps`` (work grows as steps squared)
MAX_STEPS = 20_000
#: largest accepted ``volatility * sqrt(term)``: beyond it the share-price
#: range the lattice must span (about +-6 of these standard deviations around
#: a mean that drifts by ``volatility**2 * term / 2``) overflows floating point
MAX_TOTAL_VOLATILITY = 8.0
#: largest log-price move of one step of the coarser lattice; options whose
#: ``volatility * sqrt(step)`` would exceed it get more steps
MAX_LOG_STEP = 0.3
#: options valued per block, to keep the working arrays in cache
_BLOCK = 512


def _post_steps(t, v, sigma, steps):
    """Post-vesting steps of the finer lattice: even, in proportion to the post-vesting life.

    At least enough that the coarser lattice (half the steps) moves the log
    price by no more than :data:`MAX_LOG_STEP` a step.
    """
    share = 2 * np.maximum(1, np.rint(steps * (t - v) / (2 * t)))
    need = 2 * np.ceil(sigma**2 * (t - v) / MAX_LOG_STEP**2)
    return np.maximum(share, 2 * np.ceil(need / 2)).astype(np.int64)


def _tree(s, k, t, r, sigma, q, v, barrier, optimal, lam, n_post, narrow):
    """Values on one lattice: binomial where exercise is optimal, trinomial with a barrier."""
    out = np.empty_like(s)
    if np.any(optimal):
        o = optimal
        out[o] = optimal_tree(s[o], k[o], t[o], r[o], sigma[o], q[o], v[o], lam[o], n_post[o], narrow[o])
    if not np.all(optimal):
        b = ~optimal
        out[b] = barrier_tree(s[b], k[b], t[b], r[b], sigma[b], q[b], v[b], barrier[b], optimal[b], lam[b],
                              n_post[b])
    return out


def _lattice(s, k, t, r, sigma, q, v, mult, lam, lam_pre, steps):
    """Employee option lattice on 1-D float arrays (no checks); see :func:`lattice_value`."""
    out = np.empty_like(s)
    optimal = np.isnan(mult)
    barrier = np.where(optimal, np.inf, mult * k)
    # no exercise window, or one too short for a lattice step (the value is then
    # the European one to far below a cent per share)
    life = t - v
    european = (v >= t) | ((sigma * np.sqrt(life) < 1e-7) & ((np.abs(r) + q + lam) * life < 1e-7))
    if np.any(european):
        e = european
        out[e] = _bsm(s[e], k[e], t[e], r[e], sigma[e], q[e], True) * np.exp(-lam_pre[e] * v[e])
    at_once = ~european & (v == 0) & (s >= barrier)  # exercised at the grant date
    out[at_once] = s[at_once] - k[at_once]
    rows = np.flatnonzero(~european & ~at_once)
    if rows.size:
        n_post = _post_steps(t[rows], v[rows], sigma[rows], steps)
        # group options of similar lattice size so that a block wastes little work
        rows = rows[np.argsort(n_post + np.sqrt(v[rows] / t[rows]) * steps, kind="stable")]
        n_post = _post_steps(t[rows], v[rows], sigma[rows], steps)

        def tree(job):
            start, divisor = job  # a block of options, on the finer (1) or the coarser (2) lattice
            idx = rows[start : start + _BLOCK]
            n = n_post[start : start + _BLOCK]
            args = (s[idx], k[idx], t[idx], r[idx], sigma[idx], q[idx], v[idx],
                    barrier[idx], optimal[idx], lam[idx])
            # a vesting-date law narrower than the finer lattice's nodes: a parabola on both binomial lattices
            # (the trinomial lattice of a barrier keeps linear pieces: its centre is moved onto the barrier)
            narrow = (v[idx] > 0) & (np.sqrt(v[idx]) < NARROW * np.sqrt((t[idx] - v[idx]) / n))
            return _tree(*args, n // divisor, narrow)

        # the lattices are independent: valued in worker processes where that pays (the same values),
        # the finer ones (about three quarters of the work) first so that the workers finish together
        starts = range(0, rows.size, _BLOCK)
        jobs = [(start, 1) for start in starts] + [(start, 2) for start in starts]
        fine = {}
        for (start, divisor), values in zip(jobs, ordered_map(tree, jobs)):
            if divisor == 1:
                fine[start] = values
                continue
            idx = rows[start : start + _BLOCK]
            out[idx] = (2.0 * fine.pop(start) - values) * np.exp(-lam_pre[idx] * v[idx])
    # the extrapolation can step outside the bounds the true value obeys
    low = np.where((v == 0) & (optimal | at_once), np.maximum(s - k, 0.0), 0.0)
    return np.clip(out, low, s)


def _check_steps(steps):
    """Return ``steps`` as an int, or raise :class:`InputError`."""
    try:
        ok = int(steps) == steps and MIN_STEPS <= steps <= MAX_STEPS
    except (TypeError, ValueError, OverflowError):
        ok = False
    if not ok:
        raise InputError(f"steps must be a whole number from {MIN_STEPS} to {MAX_STEPS}; got {steps!r}")
    return int(steps)


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
        extrapolated, from :data:`MIN_STEPS` to :data:`MAX_STEPS`.  Default
        :data:`DEFAULT_STEPS`.  Options with a large ``volatility**2 * term``
        get more steps, so that no step moves the log price by more than
        :data:`MAX_LOG_STEP` on the coarser lattice.

    Returns
    -------
    float or ndarray
        Value per option, currency per option; a float when every input is a
        scalar.  Always finite, between zero (the intrinsic value
        ``max(S - K, 0)`` when there is no vesting period and exercise is
        optimal or immediate) and the share price.

    Raises
    ------
    InputError
        (a :class:`ValueError`) naming the first invalid argument; also when
        ``volatility * sqrt(term)`` exceeds :data:`MAX_TOTAL_VOLATILITY`.
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
    total_vol = sigma * np.sqrt(t)
    if np.any(total_vol > MAX_TOTAL_VOLATILITY):
        bad = np.flatnonzero(np.ravel(total_vol > MAX_TOTAL_VOLATILITY))[0]
        raise InputError(
            f"volatility * sqrt(term) must be at most {MAX_TOTAL_VOLATILITY} for the lattice (the share-price "
            f"range it must span would overflow); got volatility {float(np.ravel(sigma)[bad])!r} "
            f"with term {float(np.ravel(t)[bad])!r}"
        )
    # a vesting period shorter than MIN_VESTING (well under a day: ledger dates give 0 or at least one
    # day) is valued as none; the vesting-date integral is not reliable for a near-zero spread
    v = np.where(v < MIN_VESTING, 0.0, v)
    n = DEFAULT_STEPS if steps is None else _check_steps(steps)
    shape = s.shape
    flat = [np.ravel(a) for a in (s, k, t, r, sigma, q, v, mult, lam, lam_pre)]
    return finish(_lattice(*flat, n).reshape(shape), scalar)
