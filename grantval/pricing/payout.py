"""Payout curves of market-condition awards: metric value to units earned per target unit."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from grantval.errors import InputError
from grantval.pricing._inputs import as_float_array, check, FINITE


@dataclass(frozen=True)
class PayoutCurve:
    """Piecewise-linear payout curve.

    The payout (units earned per target unit, 1.0 = 100%) is 0 below the first
    point, linear between points and flat at the last payout above the last
    point; at the first point itself it is the first payout (the condition is
    met when the metric reaches the first point).

    Parameters
    ----------
    x : array_like
        Metric values of the points, strictly increasing (units of the metric:
        percentile 0-100 for ``relative_tsr``, decimal returns for TSRs,
        currency for ``share_price``).
    payout : array_like
        Payout at each point, >= 0 and non-decreasing.
    negative_tsr_cap : float, optional
        Highest payout when the company's own TSR is negative (None: no cap).
    """

    x: tuple
    payout: tuple
    negative_tsr_cap: float | None = None

    def __post_init__(self):
        x = as_float_array("payout curve x", self.x).ravel()
        y = as_float_array("payout curve payout", self.payout).ravel()
        if x.size == 0 or x.size != y.size:
            raise InputError(f"payout curve needs one or more points with one payout each; got {x.size} x, {y.size} payouts")
        check("payout curve x", x, FINITE)
        check("payout curve payout", y, FINITE)
        if np.any(np.diff(x) <= 0):
            raise InputError(f"payout curve x must be strictly increasing; got {x.tolist()}")
        if np.any(y < 0):
            raise InputError(f"payout curve payouts must be zero or more; got {y.tolist()}")
        if np.any(np.diff(y) < 0):
            raise InputError(f"payout curve payouts must be non-decreasing; got {y.tolist()}")
        cap = self.negative_tsr_cap
        if cap is not None and not (np.isfinite(cap) and cap >= 0):
            raise InputError(f"negative_tsr_cap must be a number, zero or more; got {cap!r}")
        object.__setattr__(self, "x", tuple(float(v) for v in x))
        object.__setattr__(self, "payout", tuple(float(v) for v in y))

    @property
    def threshold(self) -> float:
        """Metric value at which the condition is first met (the first point)."""
        return self.x[0]

    def __call__(self, metric, company_tsr=None) -> np.ndarray:
        """Payout for each metric value (and company TSR, for the negative-TSR cap)."""
        metric = np.asarray(metric, dtype=float)
        out = np.interp(metric, self.x, self.payout, left=0.0, right=self.payout[-1])
        out = np.where(metric < self.x[0], 0.0, out)
        if self.negative_tsr_cap is not None:
            if company_tsr is None:
                raise InputError("a negative_tsr_cap needs the company's TSR")
            out = np.where(np.asarray(company_tsr) < 0, np.minimum(out, self.negative_tsr_cap), out)
        return out


def parse_payout_curve(text: str, negative_tsr_cap: float | None = None) -> PayoutCurve:
    """Read a curve written ``"x:payout;x:payout;..."``, e.g. ``"25:0.5;50:1;75:2"``.

    Parameters
    ----------
    text : str
        Points separated by ``;``, each ``x:payout``; spaces are ignored and
        a payout may be written as a percentage (``"50:100%"``).
    negative_tsr_cap : float, optional
        Passed to :class:`PayoutCurve`.

    Returns
    -------
    PayoutCurve

    Raises
    ------
    InputError
        When a point is not two numbers or the curve breaks the rules of
        :class:`PayoutCurve`.
    """
    if not isinstance(text, str) or not text.strip():
        raise InputError(f"payout curve must be text like '25:0.5;50:1;75:2'; got {text!r}")
    xs, ys = [], []
    for part in text.replace(" ", "").strip(";").split(";"):
        pieces = part.split(":")
        if len(pieces) != 2:
            raise InputError(f"payout curve point {part!r} must be written x:payout")
        try:
            x = float(pieces[0])
            y = float(pieces[1][:-1]) / 100 if pieces[1].endswith("%") else float(pieces[1])
        except ValueError:
            raise InputError(f"payout curve point {part!r} must be two numbers, x:payout") from None
        xs.append(x)
        ys.append(y)
    return PayoutCurve(tuple(xs), tuple(ys), negative_tsr_cap)
