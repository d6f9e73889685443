"""Roll-forward: a valuation's expected payments moved to a later date and valued there, for an interim
figure between full valuations.

The previous valuation's membership and demographic assumptions are kept: members are taken to have died,
retired and left exactly as assumed. The payments expected before the new date are dropped (paid), the
rest are discounted from the new date on the new discount curve (re-projected first on the new inflation and
salary growth when those change), and the service the active members are expected to give over the
interval is added at the previous valuation's current service cost. With unchanged assumptions and
experience exactly as expected this reproduces the full valuation at the new date (the policy-value
recursion); otherwise it is an approximation, and says so.

References
----------
Dickson, Hardy & Waters, *Actuarial Mathematics for Life Contingent Risks* (2013), ch. 7 (policy values:
(V_t + P - E)(1 + i) = p V_{t+1} + q (S + E'), here with the expected payments for E); IAS 19 *Employee
Benefits* paras 58-60 and 123 (an entity may roll forward a detailed valuation to the reporting date; the
interest cost on the opening obligation).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from valuation.discounting import RateCurve

CAUTION = ("Approximate roll-forward, not a valuation: the previous valuation's membership and demographic "
           "assumptions are kept (members died, retired and left exactly as assumed); the payments expected before "
           "the new date are taken as paid; the service cost over the interval is the previous valuation's.")


@dataclass(frozen=True)
class RollForward:
    """The lines from the opening liability to the rolled-forward one [currency]; they add up exactly:
    opening - benefits + interest + service cost + financial assumptions = liability."""

    months: int
    opening: float
    benefits_expected: float
    interest: float
    service_cost: float
    financial_assumptions: float
    liability: float

    def lines(self) -> list[tuple[str, float]]:
        return [("opening liability", self.opening), ("benefits expected to be paid", -self.benefits_expected),
                ("interest (unwinding of the discount)", self.interest),
                ("service cost over the interval", self.service_cost),
                ("change in financial assumptions", self.financial_assumptions),
                ("rolled-forward liability", self.liability)]


def roll_forward(
    opening: float,
    cash_old: NDArray[np.float64],
    cash_new: NDArray[np.float64],
    months: int,
    old_curve: RateCurve,
    new_curve: RateCurve,
    service_cost: float,
) -> RollForward:
    """Move expected monthly payments ``months`` forward and value them at the new date.

    Parameters
    ----------
    opening
        The liability at the previous valuation date [currency].
    cash_old, cash_new
        Expected nominal payments by month after the previous valuation date [currency], on the previous
        financial assumptions and on the new ones (the same array when only the discount rate changes).
    months
        Months from the previous valuation date to the new date.
    old_curve, new_curve
        The previous discount curve, read from the previous valuation date and carried forward at its own
        forward rates (the interest is its unwinding, IAS 19 para 123), and the new one, read from the new
        date (the change of curve, its roll-down included, is the financial line).
    service_cost
        The previous valuation's current service cost [currency p.a.]; one twelfth of it accrues each month
        and is carried to the new date at the new curve (approximate: every month costs what the first year's
        did).

    References
    ----------
    [DHW] ch. 7 (the policy-value recursion); PV = sum_t v(t) CF_t [DHW section 2.2].
    """
    m = np.arange(len(cash_old))
    later = m >= months
    t_after = (m[later] - months) / 12.0
    # on the opening curve carried forward (its forward rates): v0(m) / v0(n); the interest is its unwinding
    v_open = old_curve.discount_factors(m / 12.0)
    at_new_old = float((cash_old[later] * v_open[later]).sum() / v_open[months]) if months < len(m) else 0.0
    at_new = float((cash_new[later] * new_curve.discount_factors(t_after)).sum())
    paid = float(cash_old[~later].sum())
    k = np.arange(months)
    accrued = float(service_cost / 12.0 * (1.0 / new_curve.discount_factors((months - k) / 12.0)).sum())
    interest = at_new_old - opening + paid
    return RollForward(months=months, opening=opening, benefits_expected=paid, interest=interest,
                       service_cost=accrued, financial_assumptions=at_new - at_new_old,
                       liability=at_new + accrued)


__all__ = ["CAUTION", "RollForward", "roll_forward"]
