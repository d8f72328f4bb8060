"""Fair values immediately before and after each modification, on the modification date.

For each modification and each tranche of its grant (ASC 718-20-35-3; IFRS 2.27 and B43(a)):

- ``fair_value_before`` / ``fair_value_after`` given: per-unit values from an outside valuation,
  used as given for every tranche (reported as supplied);
- else the modification's ``assumption_set`` row (share price, volatility, rate, dividend yield on the
  modification date) values both the original terms in force immediately before and the modified
  terms: options with BSM at the expected term from the modification date (the row's
  ``expected_term_years``, capped at the remaining contractual term, or the simplified method of SEC
  SAB Topic 14.D.2 on the remaining vesting time and the remaining contractual term) or with the
  employee-option lattice over the remaining contractual term, each tranche to its remaining vesting
  time; RSUs as ``S e^{-q t}`` to each tranche's remaining vesting time.  Under the ``award``
  valuation unit one value per award: BSM at one term (vesting times weighted by the units
  outstanding), lattice and RSU values weighted by those units.

Units outstanding immediately before exclude units exercised, expired, forfeited or cancelled up to
and including the modification date (events of that date come first), and vested RSUs (settled).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from grantval.dates import year_fraction
from grantval.ledger.ext.modifications import Terms, pairs, terms, vest_in_force, vesting
from grantval.measurement.unique import unique_call
from grantval.pricing import DEFAULT_STEPS, bsm_value, lattice_value, rsu_value
from grantval.pricing.terms import simplified_formula


@dataclass
class ModificationValues:
    """Per modification (``terms`` order) and per (modification, tranche) pair.

    Values are currency per unit; ``units_before`` and ``units_after`` are the units outstanding
    immediately before and after (a reduction in quantity cancels the difference); ``counted_after``
    the units the cost engine counts for the tranche after the modification (granted less forfeited
    and cancelled: exercised and expired units of vested tranches are still counted).
    """

    terms: Terms
    rows: np.ndarray
    source: np.ndarray            # per modification: how the values were set
    p_mod: np.ndarray
    p_tranche: np.ndarray
    before: np.ndarray
    after: np.ndarray
    vest_before: np.ndarray
    vest_after: np.ndarray
    units_before: np.ndarray
    units_after: np.ndarray
    counted_after: np.ndarray


def _pairs(ledger, t: Terms):
    """(modification, tranche) pairs: every tranche of each modification's grant."""
    return pairs(ledger.tranches, t.gp)


def _units(ledger, p_mod, p_tr, day):
    """Per pair: units outstanding immediately before and after, and the units counted after.

    Changes dated on or before ``day`` come before the modification, except the modifications' own
    cancellations of a reduced quantity on ``day`` (rows the ledger added, ``_source`` = the
    modifications table), which come with it.
    """
    from grantval.ledger.ext._cumulative import sum_through

    ch, ev = ledger.changes, ledger.events
    src = ledger.sources.get("modifications")
    synthetic = (ev["_source"].to_numpy() == src) if "_source" in ev else np.zeros(len(ev), dtype=bool)
    c_syn = synthetic[ch["event_idx"].to_numpy()] if len(ch) else np.zeros(0, dtype=bool)
    c_t, c_d, c_q = ch["tranche_idx"].to_numpy(), ch["date"].to_numpy("datetime64[D]"), ch["quantity"].to_numpy(float)
    c_fc = np.isin(ch["kind"].to_numpy(dtype=object), ("forfeit", "cancel"))
    qty = ledger.tranches["quantity"].to_numpy(float)[p_tr]
    own = c_syn  # a modification's own cancellation: on its date, after it
    removed_all = sum_through(c_t, c_d, c_q, p_tr, day)
    own_on_day = sum_through(c_t, c_d, np.where(own, c_q, 0.0), p_tr, day) - sum_through(
        c_t, c_d, np.where(own, c_q, 0.0), p_tr, day, strict=True)
    removed_fc = sum_through(c_t, c_d, np.where(c_fc, c_q, 0.0), p_tr, day)
    after = qty - removed_all
    before = after + own_on_day
    counted = qty - removed_fc
    return before, after, counted


def _option_values(ctx: dict, strike, expiry, vest_years, policy, weights, p_mod, cache):
    """BSM or lattice values per pair of the option terms given."""
    T = np.maximum(year_fraction(ctx["day"], expiry), 0.0)
    v = np.minimum(vest_years, T)
    given = ctx["term"]
    if policy.valuation_unit == "tranche":
        term = simplified_formula(v, T)
    else:
        wsum = np.bincount(p_mod, weights=weights, minlength=p_mod.max(initial=-1) + 1)
        avg = np.bincount(p_mod, weights=weights * v, minlength=len(wsum)) / np.where(wsum > 0, wsum, 1)
        term = simplified_formula(avg[p_mod], T)
    term = np.where(np.isnan(given), term, np.minimum(given, T))
    out = np.full(len(T), np.nan)
    bsm = ctx["model"] == "bsm"
    if bsm.any():
        out[bsm], _ = unique_call(bsm_value, dict(
            share_price=ctx["s"][bsm], strike=strike[bsm], term=term[bsm], rate=ctx["r"][bsm],
            volatility=ctx["vol"][bsm], dividend_yield=ctx["q"][bsm]), cache)
    lat = ~bsm
    if lat.any():
        out[lat], _ = unique_call(lattice_value, dict(
            share_price=ctx["s"][lat], strike=strike[lat], term=T[lat], rate=ctx["r"][lat],
            volatility=ctx["vol"][lat], dividend_yield=ctx["q"][lat], vesting=v[lat],
            exercise_multiple=ctx["mult"][lat], exit_rate=ctx["exit"][lat]), cache,
            steps=policy.lattice_steps or DEFAULT_STEPS)
    return out


def _award_mean(values, weights, p_mod):
    """Units-weighted mean per modification, scattered back to its pairs."""
    wsum = np.bincount(p_mod, weights=weights, minlength=p_mod.max(initial=-1) + 1)
    num = np.bincount(p_mod, weights=np.nan_to_num(values) * weights, minlength=len(wsum))
    plain = np.bincount(p_mod, weights=np.nan_to_num(values), minlength=len(wsum)) / np.maximum(
        np.bincount(p_mod, minlength=len(wsum)), 1)
    return np.where(wsum > 0, num / np.where(wsum > 0, wsum, 1), plain)[p_mod]


def _assumption_inputs(ledger, mods, t: Terms, p_mod, day, rows=None) -> dict:
    """Per pair: the valuation inputs of the modification's assumption row (or of ``rows``, per modification)."""
    a = ledger.assumptions
    if rows is None:
        first = {}
        for i, k in enumerate(a["assumption_set"]):
            if k is not None and k not in first:
                first[k] = i
        names = mods["assumption_set"].to_numpy(dtype=object)[t.order][p_mod]
        ai = np.array([first.get(k, 0) for k in names], dtype=np.int64)
    else:
        ai = np.asarray(rows, dtype=np.int64)[p_mod]
    col = lambda c: a[c].to_numpy(float)[ai]  # noqa: E731
    return dict(day=day, s=col("share_price"), vol=col("volatility"), r=col("risk_free_rate"),
                q=np.nan_to_num(col("dividend_yield")), term=col("expected_term_years"),
                model=a["model"].to_numpy(dtype=object)[ai], mult=col("exercise_multiple"),
                exit=np.nan_to_num(col("post_vest_exit_rate")))


def _computed(ledger, mods, t, p_mod, p_tr, vb, va, w, policy, cache, rows=None):
    """(before, after) per pair from the modifications' assumption rows (or ``rows``, per modification)."""
    day = t.date[p_mod]
    ctx = _assumption_inputs(ledger, mods, t, p_mod, day, rows)
    award = ledger.grants["award_type"].to_numpy(dtype=object)[t.gp][p_mod]
    yb, ya = np.maximum(year_fraction(day, vb), 0.0), np.maximum(year_fraction(day, va), 0.0)
    before, after = np.full(len(p_mod), np.nan), np.full(len(p_mod), np.nan)
    opt = award == "option"
    if opt.any():
        sub = {k: (v[opt] if isinstance(v, np.ndarray) else v) for k, v in ctx.items()}
        pm = np.unique(p_mod[opt], return_inverse=True)[1].ravel()
        before[opt] = _option_values(sub, t.strike_before[p_mod][opt], t.expiry_before[p_mod][opt], yb[opt],
                                     policy, w[opt], pm, cache)
        after[opt] = _option_values(sub, t.strike_after[p_mod][opt], t.expiry_after[p_mod][opt], ya[opt],
                                    policy, w[opt], pm, cache)
    rsu = ~opt
    if rsu.any():
        before[rsu] = rsu_value(ctx["s"][rsu], yb[rsu], ctx["q"][rsu])
        after[rsu] = rsu_value(ctx["s"][rsu], ya[rsu], ctx["q"][rsu])
    if policy.valuation_unit != "tranche":
        lat_or_rsu = rsu | (ctx["model"] != "bsm")
        before = np.where(lat_or_rsu, _award_mean(before, w, p_mod), before)
        after = np.where(lat_or_rsu, _award_mean(after, w, p_mod), after)
    return before, after


def modification_values(ledger, policy, cache: dict | None = None) -> ModificationValues | None:
    """Fair values before and after every modification of a checked ledger (None when it has none)."""
    mods = ledger.tables.get("modifications")
    if mods is None or not len(mods):
        return None
    t = terms(ledger.grants, mods)
    vs = vesting(ledger.grants, ledger.tranches, mods, t)
    p_mod, p_tr = vs.p_mod, vs.p_tranche
    day = t.date[p_mod]
    vb, va = vs.vest_before, vs.vest_after
    # IFRS 2 B44(c): a longer vesting period does not benefit the employee and is not taken into account
    ignored = (policy.standard == "ifrs2") & (va > vb)
    va_valued = np.where(ignored, vb, va)
    ub, ua, counted = _units(ledger, p_mod, p_tr, day)
    rsu = ledger.grants["award_type"].to_numpy(dtype=object)[t.gp][p_mod] == "rsu"
    settled = rsu & (vb <= day)
    ub, ua = np.where(settled, 0.0, ub), np.where(settled, 0.0, ua)
    fb = mods["fair_value_before"].to_numpy(float)[t.order]
    fa = mods["fair_value_after"].to_numpy(float)[t.order]
    supplied = ~np.isnan(fb)
    before, after = fb[p_mod].copy(), fa[p_mod].copy()
    comp = ~supplied[p_mod]
    if comp.any():
        idx = np.flatnonzero(comp)
        sub_t = Terms(*(getattr(t, f) for f in Terms.__dataclass_fields__))
        b, a = _computed(ledger, mods, sub_t, p_mod[idx], p_tr[idx], vb[idx], va_valued[idx], ua[idx], policy,
                         cache)
        before[idx], after[idx] = b, a
    model = _models(ledger, mods, t)
    source = np.where(supplied, "supplied by outside valuation", model)
    return ModificationValues(t, mods["_row"].to_numpy()[t.order], source, p_mod, p_tr, before, after, vb, va,
                              ub, ua, counted)


def _models(ledger, mods, t: Terms) -> np.ndarray:
    a = ledger.assumptions
    model = dict(zip(a["assumption_set"], a["model"]))
    award = ledger.grants["award_type"].to_numpy(dtype=object)[t.gp]
    names = mods["assumption_set"].to_numpy(dtype=object)[t.order]
    return np.array([("computed: rsu" if aw == "rsu" else f"computed: {model.get(k, 'bsm')}")
                     for aw, k in zip(award, names)], dtype=object)


@dataclass
class ReplacedValues:
    """Per replacement: the cancelled grant's value immediately before, on the replacement's grant date.

    ``new`` and ``old`` are grant positions; ``value_before`` the total fair value of the units of the
    cancelled grant outstanding then (currency), valued with the replacement's assumption row on the
    cancelled grant's terms in force; ``units`` those units.
    """

    new: np.ndarray
    old: np.ndarray
    date: np.ndarray
    units: np.ndarray
    value_before: np.ndarray
    per_unit_before: np.ndarray


def _terms_before(ledger, old: np.ndarray, date: np.ndarray) -> Terms:
    """The replaced grants' terms in force on ``date`` (their modifications dated before it applied)."""
    g = ledger.grants
    n = len(old)
    strike = g["exercise_price"].to_numpy(float)[old].copy()
    expiry = g["expiration_date"].to_numpy("datetime64[D]")[old].copy()
    accel = np.full(n, np.datetime64("NaT"), dtype="datetime64[D]")
    mods = ledger.tables.get("modifications")
    if mods is not None and len(mods):
        t = terms(g, mods)
        for i, (o, d) in enumerate(zip(old, date)):
            hit = np.flatnonzero((t.gp == o) & (t.date < d))
            if len(hit):
                j = hit[-1]
                strike[i], expiry[i] = t.strike_after[j], t.expiry_after[j]
                acc = t.date[hit][t.accelerate[hit]]
                accel[i] = acc.min() if len(acc) else np.datetime64("NaT")
    z = np.zeros(n, dtype=np.int64)
    return Terms(np.arange(n), old, date, z, strike, strike, expiry, expiry, accel, np.zeros(n, dtype=bool))


def _vest_on(ledger, p_tr: np.ndarray, day: np.ndarray) -> np.ndarray:
    """Vest date of tranches ``p_tr`` in force on ``day`` (their grant's modifications dated before it applied)."""
    vest = ledger.tranches["vest_date"].to_numpy("datetime64[D]")[p_tr].copy()
    mods = ledger.tables.get("modifications")
    if mods is None or not len(mods):
        return vest
    vs = vesting(ledger.grants, ledger.tranches, mods)
    when = vs.terms.date[vs.p_mod]
    for i, (tr, d) in enumerate(zip(p_tr, day)):
        hit = np.flatnonzero((vs.p_tranche == tr) & (when < d))
        if len(hit):
            vest[i] = vs.vest_after[hit[np.argmax(when[hit])]]
    return vest


def _espp_before(ledger, old: np.ndarray, new: np.ndarray, day: np.ndarray, purchase: np.ndarray) -> np.ndarray:
    """Per purchase period of a rolled-over enrollment: its value on the roll-over date, per share counted.

    :func:`grantval.pricing.espp_remaining_value` with the old offering's reference (start) price,
    discount, look-back and basis, on the new offering's start-date inputs (the share price then).
    """
    from grantval.pricing import espp_remaining_value

    g, a = ledger.grants, ledger.assumptions
    col = lambda c, rows: a[c].to_numpy(float)[ledger.grant_assumption[rows]]  # noqa: E731
    out = np.zeros(len(old))
    look, basis = g["_espp_lookback"].to_numpy()[old], g["_espp_basis"].to_numpy(dtype=object)[old]
    for lb in (True, False):
        for b in ("fixed_shares", "fixed_withholding"):
            m = (look == lb) & (basis == b)
            if m.any():
                out[m] = espp_remaining_value(
                    col("share_price", new[m]), col("share_price", old[m]), np.maximum(year_fraction(day[m],
                    purchase[m]), 0.0), col("risk_free_rate", new[m]), col("volatility", new[m]),
                    np.nan_to_num(col("dividend_yield", new[m])), g["_espp_discount"].to_numpy(float)[old[m]],
                    lookback=bool(lb), basis=b)
    return out


def replaced_values(ledger, policy, cache: dict | None = None) -> ReplacedValues | None:
    """Value of every replaced grant immediately before its replacement (None when there is none)."""
    from grantval.ledger.ext.modifications import replacements

    new, old = replacements(ledger.grants)
    if not len(new):
        return None
    date = ledger.grants["grant_date"].to_numpy("datetime64[D]")[new]
    t = _terms_before(ledger, old, date)
    p_mod, p_tr = _pairs(ledger, t)
    day = date[p_mod]
    vb = _vest_on(ledger, p_tr, day)
    ub, _, _ = _units(ledger, p_mod, p_tr, day - np.timedelta64(1, "D"))
    rsu = ledger.grants["award_type"].to_numpy(dtype=object)[old][p_mod] == "rsu"
    ub = np.where(rsu & (vb < day), 0.0, ub)
    before, _ = _computed(ledger, None, t, p_mod, p_tr, vb, vb, ub, policy, cache,
                          rows=ledger.grant_assumption[new])
    espp = ledger.grants["award_type"].to_numpy(dtype=object)[old][p_mod] == "espp"
    if espp.any():  # an offering rolled over into a new one: its purchase periods not yet reached
        ub = np.where(espp & (vb <= day), 0.0, ub)
        before[espp] = _espp_before(ledger, old[p_mod][espp], new[p_mod][espp], day[espp], vb[espp])
    units = np.bincount(p_mod, weights=ub, minlength=len(new))
    total = np.bincount(p_mod, weights=before * ub, minlength=len(new))
    return ReplacedValues(new, old, date, units, total, total / np.where(units > 0, units, 1))


__all__ = ["ModificationValues", "ReplacedValues", "modification_values", "replaced_values", "vest_in_force"]
