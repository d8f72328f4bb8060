"""Correlated risk-neutral share-price paths for market-condition awards.

One :func:`simulate_market` call simulates the company (asset 0) and any
number of peers or indices under correlated geometric Brownian motion and
keeps, per path, only what the awards need: each asset's total shareholder
return over the performance period, its price at the period end and, when a
hurdle is monitored every trading day, the company's highest (averaged) price
and the first day each requested hurdle is reached.  Many awards sharing the
assets and dates are then valued on the same simulation
(:mod:`grantval.pricing.market_condition`).

Method (see ``docs/market-conditions.md``):

- under the risk-neutral measure ``d ln S_a = (r - q_a - sigma_a^2/2) dt +
  sigma_a dW_a`` with ``corr(dW_a, dW_b) = rho_ab``; the total-return index
  (dividends reinvested) is ``S_a(t) e^{q_a t}``;
- exact log-normal steps, taken only on the trading days that matter (the
  averaging days at each end of the period; every day for the company alone
  when ``daily=True``); a long step is one normal draw, so the law of the
  prices on those days is exact whatever the step length;
- the correlated normals are ``L z`` with ``L`` the Cholesky factor of the
  correlation matrix (rows for zero pivots of a singular, positive
  semi-definite matrix are handled exactly);
- antithetic variates: paths ``2i`` and ``2i + 1`` use ``z`` and ``-z``;
- a seeded generator (``numpy.random.default_rng(seed)``, PCG64), paths
  simulated in fixed-size blocks, so a rerun with the same arguments is
  identical.

Times are trading days, 252 a year: the period has ``days = round(252 T)``
trading days and ``T = days / 252`` is used throughout.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from grantval.errors import InputError
from grantval.pricing._inputs import FINITE, NON_NEGATIVE, POSITIVE, as_float_array, check

#: trading days per year
TRADING_DAYS = 252
#: paths simulated when ``paths`` is not given
DEFAULT_PATHS = 100_000
#: most paths accepted (8 bytes are kept per path and asset, plus 8 to 20 per path:
#: 1.8 GB at 10,000,000 paths and 21 assets)
MAX_PATHS = 10_000_000
#: seed used when ``seed`` is not given, so reruns are identical
DEFAULT_SEED = 20261202
#: working-array budget per block, in path-days (keeps daily paths out of memory)
_BLOCK_PATH_DAYS = 4_000_000
#: most antithetic pairs per block
_MAX_BLOCK_PAIRS = 16_384


@dataclass
class MarketSimulation:
    """Per-path results of :func:`simulate_market` (read-only by convention).

    Attributes
    ----------
    share_price, volatility, dividend_yield : ndarray, shape (assets,)
        The inputs per asset; asset 0 is the company.
    rate : float
        Risk-free rate, continuously compounded decimal per year.
    days : int
        Trading days in the performance period (from the valuation date).
    term : float
        ``days / 252``, years.
    averaging_days : int
        Trading days averaged at each end of the period.
    tsr : ndarray, shape (paths, assets), float32
        Total shareholder return of each asset over the period, decimal.
    end_price : ndarray, shape (paths, assets), float32
        Share price of each asset on the last day of the period.
    end_average : ndarray, shape (paths,)
        The company's average share price over the last ``averaging_days``
        trading days of the period (its price on the last day when 1).
    max_price : ndarray, shape (paths,) or None
        With ``daily=True``: the company's highest ``averaging_days``-day
        average price over the period (day 0 included), else None.
    hurdles : ndarray, shape (hurdles,)
        The hurdle prices whose first-passage days were recorded.
    hit_day : ndarray, shape (paths, hurdles), int32
        First trading day on which the monitored company price is at or above
        each hurdle; ``days + 1`` when never reached in the period.
    antithetic : bool
        Whether paths ``2i, 2i+1`` are antithetic pairs (else independent).
    seed : int
        Seed of the generator.
    """

    share_price: np.ndarray
    volatility: np.ndarray
    dividend_yield: np.ndarray
    rate: float
    days: int
    term: float
    averaging_days: int
    tsr: np.ndarray
    end_price: np.ndarray
    end_average: np.ndarray
    max_price: np.ndarray | None
    hurdles: np.ndarray
    hit_day: np.ndarray
    antithetic: bool
    seed: int
    cache: dict = field(default_factory=dict, repr=False)

    @property
    def paths(self) -> int:
        """Number of simulated paths."""
        return self.tsr.shape[0]

    @property
    def assets(self) -> int:
        """Number of assets (company first)."""
        return self.tsr.shape[1]


def correlation_factor(correlation, assets: int) -> np.ndarray:
    """Lower-triangular ``L`` with ``L L^T = correlation``, or raise InputError.

    Parameters
    ----------
    correlation : array_like, shape (assets, assets), or scalar
        Correlation matrix of the assets' Brownian motions; a scalar is the
        common correlation of every pair.
    assets : int
        Number of assets.

    Returns
    -------
    ndarray, shape (assets, assets)
        Cholesky factor; singular positive semi-definite matrices are
        accepted (a zero pivot gives a zero column).

    Raises
    ------
    InputError
        When the matrix is not square of the right size, not symmetric, has a
        diagonal other than 1, an entry outside [-1, 1], or is not positive
        semi-definite.
    """
    c = as_float_array("correlation", correlation)
    check("correlation", c, FINITE)
    if c.ndim == 0:
        c = np.full((assets, assets), float(c))
        np.fill_diagonal(c, 1.0)
    if c.shape != (assets, assets):
        raise InputError(f"correlation must be a scalar or a {assets} x {assets} matrix; got shape {c.shape}")
    if np.any(np.abs(c) > 1.0 + 1e-12):
        bad = c[np.abs(c) > 1.0 + 1e-12][0]
        raise InputError(f"correlation entries must lie in [-1, 1]; got {bad!r}")
    if not np.allclose(c, c.T, atol=1e-12, rtol=0):
        raise InputError("correlation must be symmetric")
    if not np.allclose(np.diag(c), 1.0, atol=1e-12, rtol=0):
        raise InputError("correlation must have 1 on its diagonal")
    low = float(np.linalg.eigvalsh(c).min()) if assets else 0.0
    if low < -1e-10:
        raise InputError(
            f"correlation matrix is not positive semi-definite (smallest eigenvalue {low:.3g}); "
            "it cannot be the correlation of any set of returns"
        )
    return _cholesky_semidefinite(c)


def _cholesky_semidefinite(c: np.ndarray) -> np.ndarray:
    """Cholesky factor of a positive semi-definite matrix; zero pivots give zero columns."""
    n = c.shape[0]
    low = np.zeros_like(c)
    for j in range(n):
        pivot = c[j, j] - low[j, :j] @ low[j, :j]
        if pivot <= 1e-12:
            continue
        low[j, j] = np.sqrt(pivot)
        low[j + 1 :, j] = (c[j + 1 :, j] - low[j + 1 :, :j] @ low[j, :j]) / low[j, j]
    return low


def _asset_vector(name, value, assets, rule) -> np.ndarray:
    arr = as_float_array(name, value)
    check(name, arr, rule)
    if arr.ndim > 1 or (arr.ndim == 1 and arr.shape[0] not in (1, assets)):
        raise InputError(f"{name} must be a scalar or have one value per asset ({assets}); got shape {arr.shape}")
    return np.broadcast_to(arr, (assets,)).astype(float)


def _whole(name, value, low, high) -> int:
    try:
        whole = not isinstance(value, bool) and float(value).is_integer() and low <= value <= high
    except (TypeError, ValueError):
        whole = False
    if not whole:
        raise InputError(f"{name} must be a whole number from {low:,} to {high:,}; got {value!r}")
    return int(value)


def _check_inputs(share_price, volatility, dividend_yield, rate, term, averaging_days, start_level, hurdles):
    s = as_float_array("share_price", share_price)
    if s.ndim != 1 or s.shape[0] < 1:
        raise InputError(f"share_price must be one price per asset (company first); got shape {s.shape}")
    check("share_price", s, POSITIVE)
    assets = s.shape[0]
    vol = _asset_vector("volatility", volatility, assets, NON_NEGATIVE)
    q = _asset_vector("dividend_yield", dividend_yield, assets, FINITE)
    r = as_float_array("rate", rate)
    if r.ndim:
        raise InputError("rate must be one number (one risk-free rate for all assets)")
    check("rate", r, FINITE)
    t = as_float_array("term", term)
    if t.ndim:
        raise InputError("term must be one number of years")
    check("term", t, POSITIVE)
    days = int(round(float(t) * TRADING_DAYS))
    if days < 1:
        raise InputError(f"term must be at least one trading day (1/252 year); got {float(t)!r}")
    m = _whole("averaging_days", averaging_days, 1, days)
    start = None
    if start_level is not None:
        start = _asset_vector("start_level", start_level, assets, POSITIVE)
    h = as_float_array("hurdles", [] if hurdles is None else hurdles).ravel()
    check("hurdles", h, POSITIVE)
    return s, vol, q, float(r), days, m, start, h


def simulate_market(
    share_price,
    volatility,
    dividend_yield,
    rate,
    term,
    correlation=0.0,
    *,
    averaging_days=1,
    daily=False,
    start_level=None,
    hurdles=None,
    paths=DEFAULT_PATHS,
    seed=DEFAULT_SEED,
    antithetic=True,
) -> MarketSimulation:
    """Simulate the company and its peers (or an index) over a performance period.

    Parameters
    ----------
    share_price : array_like, shape (assets,)
        Price of each asset at the valuation date, currency per share, > 0;
        asset 0 is the company.
    volatility : array_like, shape (assets,) or scalar
        Volatility of each asset's log return, decimal per square-root year.
    dividend_yield : array_like, shape (assets,) or scalar
        Continuous dividend yield of each asset, decimal per year.
    rate : float
        Risk-free rate, continuously compounded decimal per year.
    term : float
        Years from the valuation date to the end of the performance period,
        rounded to whole trading days (252 a year).
    correlation : array_like, shape (assets, assets), or scalar
        Correlation of the assets' log returns; a scalar applies to every pair.
    averaging_days : int, optional
        Trading days averaged at each end: the start value is the average of
        the total-return index on days ``0 .. m-1`` and the end value its
        average on days ``days-m+1 .. days``.  1 (default) uses the prices on
        the valuation date and the last day.
    daily : bool, optional
        Monitor the company's price every trading day (for ``share_price``
        metrics with ``monitoring="any_day"`` and derived service periods).
    start_level : array_like, shape (assets,), optional
        For a period that started before the valuation date (its start
        averaging window complete): each asset's start value of its
        total-return index, expressed in today's price units (today's price
        divided by one plus the total return since the start value was set).
        Then day 0 is the valuation date and only the end window is simulated.
    hurdles : array_like, optional
        Company prices whose first-passage day is recorded (``daily=True``).
    paths : int, optional
        Number of paths, 2 to :data:`MAX_PATHS` (default :data:`DEFAULT_PATHS`);
        rounded up to an even number.
    seed : int, optional
        Seed of the random generator (default :data:`DEFAULT_SEED`).
    antithetic : bool, optional
        Pair each path with its antithetic (default True).

    Returns
    -------
    MarketSimulation
        Per-path TSRs, end prices and hurdle results.

    Raises
    ------
    InputError
        Naming the first invalid argument (including a correlation matrix
        that is not positive semi-definite).
    """
    s, vol, q, r, days, m, start, h = _check_inputs(
        share_price, volatility, dividend_yield, rate, term, averaging_days, start_level, hurdles
    )
    if h.size and not daily:
        raise InputError("hurdles are recorded only with daily=True (daily monitoring)")
    n = _whole("paths", paths, 2, MAX_PATHS)
    n += n % 2
    seed = _whole("seed", seed, 0, 2**63 - 1)
    low = correlation_factor(correlation, s.shape[0])
    days_list = _window_days(days, m, start is None)
    per_pair = 2 * (days if daily else len(days_list)) + 2 * s.shape[0]
    block = int(max(64, min(_MAX_BLOCK_PAIRS, _BLOCK_PATH_DAYS // per_pair)))
    rng = np.random.default_rng(seed)
    out = _Outputs(n, s.shape[0], h.size, daily)
    spec = _Spec(s, vol, q, r, days, m, start, h, low, daily, antithetic, days_list)
    done = 0
    while done < n // 2:
        pairs = min(block, n // 2 - done)
        out.store(2 * done, _simulate_block(spec, rng, pairs))
        done += pairs
    return MarketSimulation(
        s, vol, q, r, days, days / TRADING_DAYS, m, out.tsr, out.end_price,
        out.end_average, out.max_price, h, out.hit_day, bool(antithetic), seed,
    )


def _window_days(days: int, m: int, simulate_start: bool) -> list[int]:
    """Sorted trading days on which every asset is needed (day 0 excluded)."""
    wanted = set(range(days - m + 1, days + 1))
    if simulate_start:
        wanted |= set(range(1, m))
    return sorted(d for d in wanted if d > 0)


@dataclass
class _Spec:
    s: np.ndarray
    vol: np.ndarray
    q: np.ndarray
    r: float
    days: int
    m: int
    start: np.ndarray | None
    hurdles: np.ndarray
    low: np.ndarray
    daily: bool
    antithetic: bool
    window_days: list


class _Outputs:
    """The kept per-path arrays, filled block by block."""

    def __init__(self, n, assets, n_hurdles, daily):
        self.tsr = np.empty((n, assets), dtype=np.float32)
        self.end_price = np.empty((n, assets), dtype=np.float32)
        self.end_average = np.empty(n)
        self.max_price = np.empty(n) if daily else None
        self.hit_day = np.empty((n, n_hurdles), dtype=np.int32)

    def store(self, first, block):
        tsr, end_price, end_average, max_price, hit_day = block
        rows = slice(first, first + tsr.shape[0])
        self.tsr[rows] = tsr
        self.end_price[rows] = end_price
        self.end_average[rows] = end_average
        if self.max_price is not None:
            self.max_price[rows] = max_price
        self.hit_day[rows] = hit_day


def _interleave(a: np.ndarray) -> np.ndarray:
    """(2, pairs, ...) -> (2 * pairs, ...) with the two members of a pair adjacent."""
    return np.swapaxes(a, 0, 1).reshape((2 * a.shape[1],) + a.shape[2:])


def _simulate_block(spec: _Spec, rng, pairs: int):
    """Simulate ``pairs`` path pairs; return (tsr, end_price, end_average, max_price, hit_day).

    Works in float32 (log returns of at most a few units, so the rounding is
    about 1e-7 of a price, far below the Monte Carlo error); the two members
    of each pair are ``[0]`` and ``[1]`` of the leading axis.
    """
    assets = spec.s.shape[0]
    f32 = np.float32
    dt = 1.0 / TRADING_DAYS
    drift = ((spec.r - 0.5 * spec.vol**2) * dt).astype(f32)  # log total-return index, per day
    q_day = spec.q[0] * dt
    log_tr = np.zeros((2, pairs, assets), dtype=f32)  # ln(TR_t / S_0), TR_0 = S_0
    start_sum = np.zeros((2, pairs, assets), dtype=f32)
    end_sum = np.zeros((2, pairs, assets), dtype=f32)
    end_price_sum = np.zeros((2, pairs), dtype=f32)
    end_first = spec.days - spec.m + 1
    if spec.start is None:
        start_sum += 1.0  # day 0 of the start window
    daily = _DailyMonitor(spec, pairs) if spec.daily else None
    low_t = np.ascontiguousarray(spec.low.T, dtype=f32)
    day = 0
    for nxt in spec.window_days:
        k = nxt - day
        z = rng.standard_normal((pairs, assets), dtype=f32)
        other = None if spec.antithetic else rng.standard_normal((pairs, assets), dtype=f32)
        if daily is not None:
            z[:, 0], total = daily.advance(rng, log_tr[:, :, 0], day, k)
            if other is not None:
                other[:, 0] = total
        scale = (spec.vol * np.sqrt(k * dt)).astype(f32)
        step = np.einsum("pa,ab->pb", z, low_t)  # no BLAS: small products, no thread contention
        step *= scale
        log_tr[0] += step
        if other is None:
            log_tr[1] -= step
        else:
            step = np.einsum("pa,ab->pb", other, low_t)
            step *= scale
            log_tr[1] += step
        log_tr += drift * k
        day = nxt
        level = np.exp(log_tr)
        if spec.start is None and day < spec.m:
            start_sum += level
        if day >= end_first:
            end_sum += level
            end_price_sum += level[:, :, 0] * f32(np.exp(-q_day * day))
    start = start_sum / f32(spec.m) if spec.start is None else (spec.start / spec.s).astype(f32)
    tsr = end_sum / f32(spec.m) / start - f32(1.0)
    end_price = spec.s * np.exp(log_tr.astype(float) - spec.q * spec.days * dt)
    end_average = spec.s[0] * end_price_sum.astype(float) / spec.m
    if daily is not None:
        max_price, hit_day = _interleave(daily.best), _interleave(daily.hit)
    else:
        max_price, hit_day = None, np.zeros((2 * pairs, 0), dtype=np.int32)
    return _interleave(tsr), _interleave(end_price), _interleave(end_average), max_price, hit_day


class _DailyMonitor:
    """Company price every trading day: running maximum of its moving average, hurdle hits."""

    def __init__(self, spec: _Spec, pairs: int):
        self.spec = spec
        s0 = spec.s[0]
        self.recent = np.full((spec.m - 1, 2, pairs), s0)  # last m-1 daily prices
        self.best = np.full((2, pairs), s0 if spec.m == 1 else -np.inf)
        never = spec.days + 1
        self.hit = np.where(s0 >= spec.hurdles, 0, never).astype(np.int32)
        self.hit = np.broadcast_to(self.hit, (2, pairs, spec.hurdles.size)).copy()
        if spec.m > 1:
            self.hit[:] = never

    def advance(self, rng, log_tr0, day, k):
        """Step the company ``k`` days from ``day``.

        Returns the standardised total normals of the two pair members,
        ``sum(z) / sqrt(k)``, which drive the company's step between window days.
        """
        spec = self.spec
        dt = 1.0 / TRADING_DAYS
        pairs = log_tr0.shape[1]
        z = rng.standard_normal((k, pairs), dtype=np.float32)
        cum = np.cumsum(z, axis=0, dtype=np.float64)
        if spec.antithetic:
            cum2 = -cum
        else:
            cum2 = np.cumsum(rng.standard_normal((k, pairs), dtype=np.float32), axis=0, dtype=np.float64)
        steps = np.arange(1, k + 1)[:, None]
        base = (spec.r - spec.q[0] - 0.5 * spec.vol[0] ** 2) * dt * steps - spec.q[0] * day * dt
        sd = spec.vol[0] * np.sqrt(dt)
        price = np.stack(
            [spec.s[0] * np.exp(log_tr0[i][None, :] + base + sd * c) for i, c in enumerate((cum, cum2))],
            axis=1,
        )  # (k, 2, pairs)
        self._monitor(price, day)
        root = np.sqrt(k)
        return (cum[-1] / root).astype(np.float32), (cum2[-1] / root).astype(np.float32)

    def _monitor(self, price, day):
        """Update the running maximum and first-hit days with prices of days day+1 .. day+k."""
        spec = self.spec
        if spec.m > 1:
            hist = np.concatenate([self.recent, price])  # (m-1+k, 2, pairs)
            csum = np.cumsum(hist, axis=0)
            csum = np.concatenate([np.zeros((1,) + csum.shape[1:]), csum])
            avg = (csum[spec.m :] - csum[: -spec.m]) / spec.m  # windows ending at each new day
            self.recent = hist[-(spec.m - 1) :]
            valid_from = max(0, spec.m - 2 - day)  # a window ending before day m-1 reaches before day 0
            avg = avg[valid_from:]
            first_day = day + 1 + valid_from
        else:
            avg, first_day = price, day + 1
        if avg.shape[0] == 0:
            return
        self.best = np.maximum(self.best, avg.max(axis=0))
        for j, level in enumerate(spec.hurdles):
            above = avg >= level
            any_above = above.any(axis=0)
            first = first_day + above.argmax(axis=0)
            update = any_above & (self.hit[:, :, j] > spec.days)
            self.hit[:, :, j] = np.where(update, first, self.hit[:, :, j])
