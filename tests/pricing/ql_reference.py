"""Reference values from QuantLib (PyPI package ``QuantLib``), a general-purpose pricing library.

Times are whole days on an Actual/365 (Fixed) basis so that QuantLib's dates
and grantval's year fractions agree exactly; rates are flat, continuously
compounded, as grantval assumes.
"""

from __future__ import annotations

import QuantLib as ql

TODAY = ql.Date(1, 1, 2026)
DAY_COUNT = ql.Actual365Fixed()


def _process(s, r, q, vol):
    ql.Settings.instance().evaluationDate = TODAY
    spot = ql.QuoteHandle(ql.SimpleQuote(float(s)))
    rts = ql.YieldTermStructureHandle(ql.FlatForward(TODAY, float(r), DAY_COUNT))
    qts = ql.YieldTermStructureHandle(ql.FlatForward(TODAY, float(q), DAY_COUNT))
    vts = ql.BlackVolTermStructureHandle(
        ql.BlackConstantVol(TODAY, ql.NullCalendar(), float(vol), DAY_COUNT)
    )
    return ql.BlackScholesMertonProcess(spot, qts, rts, vts)


def european(s, k, days, r, vol, q, kind="call"):
    """QuantLib AnalyticEuropeanEngine value; ``days`` to expiry."""
    proc = _process(s, r, q, vol)
    opt_type = ql.Option.Call if kind == "call" else ql.Option.Put
    option = ql.VanillaOption(
        ql.PlainVanillaPayoff(opt_type, float(k)), ql.EuropeanExercise(TODAY + int(days))
    )
    option.setPricingEngine(ql.AnalyticEuropeanEngine(proc))
    return option.NPV()


def american_call(s, k, days, r, vol, q, vest_days=0, engine="fd", steps=1000, x_grid=1200):
    """QuantLib American call whose exercise window opens ``vest_days`` after today.

    ``engine="fd"``: FdBlackScholesVanillaEngine(process, steps, x_grid);
    ``engine="crr"``: BinomialVanillaEngine(process, "crr", steps).
    """
    proc = _process(s, r, q, vol)
    exercise = ql.AmericanExercise(TODAY + int(vest_days), TODAY + int(days))
    option = ql.VanillaOption(ql.PlainVanillaPayoff(ql.Option.Call, float(k)), exercise)
    if engine == "fd":
        option.setPricingEngine(ql.FdBlackScholesVanillaEngine(proc, int(steps), int(x_grid)))
    else:
        option.setPricingEngine(ql.BinomialVanillaEngine(proc, "crr", int(steps)))
    return option.NPV()


def european_call_greeks(s, k, days, r, vol, q):
    """QuantLib AnalyticEuropeanEngine sensitivities of a European call; ``days`` to expiry.

    Returns QuantLib's own conventions: ``delta``; ``vega`` per 1.00 of
    volatility; ``theta`` per year (on DAY_COUNT, so dV/dT = -theta);
    ``rho`` and ``dividendRho`` per 1.00 of rate or yield.
    """
    option = ql.VanillaOption(
        ql.PlainVanillaPayoff(ql.Option.Call, float(k)), ql.EuropeanExercise(TODAY + int(days))
    )
    option.setPricingEngine(ql.AnalyticEuropeanEngine(_process(s, r, q, vol)))
    return {
        "delta": option.delta(),
        "vega": option.vega(),
        "theta": option.theta(),
        "rho": option.rho(),
        "dividendRho": option.dividendRho(),
    }


def up_and_out_call(s, k, barrier, days, r, vol, q, rebate=0.0):
    """QuantLib AnalyticBarrierEngine value of an up-and-out call, rebate paid at the hit."""
    proc = _process(s, r, q, vol)
    option = ql.BarrierOption(
        ql.Barrier.UpOut, float(barrier), float(rebate),
        ql.PlainVanillaPayoff(ql.Option.Call, float(k)), ql.EuropeanExercise(TODAY + int(days)),
    )
    option.setPricingEngine(ql.AnalyticBarrierEngine(proc))
    return option.NPV()


def up_and_out_call_fd(s, k, barrier, days, r, vol, q, rebate=0.0, t_grid=800, x_grid=800):
    """QuantLib FdBlackScholesBarrierEngine value of the same up-and-out call."""
    proc = _process(s, r, q, vol)
    option = ql.BarrierOption(
        ql.Barrier.UpOut, float(barrier), float(rebate),
        ql.PlainVanillaPayoff(ql.Option.Call, float(k)), ql.EuropeanExercise(TODAY + int(days)),
    )
    option.setPricingEngine(ql.FdBlackScholesBarrierEngine(proc, int(t_grid), int(x_grid)))
    return option.NPV()
