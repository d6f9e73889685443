"""A member's pension in payment, certain to the end of any guarantee, with a spouse's reversion.

The pension on the record (by tranche) is paid for life with its tranche's increases in payment (full
increases: the pension is already in payment); during a guarantee it is paid whether or not the member
lives. The spouse's pension starts after the member's death and after the guarantee's end
(``reversion.py``).

References
----------
.. [DHW] Dickson, Hardy & Waters, *Actuarial Mathematics for Life Contingent Risks*, 2nd ed. (2013),
   eq. (5.12) (whole life annuity), section 5.6 (guaranteed annuities), section 9.5 (reversion).
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

from valuation.engine.benefits.base import (
    MEMBER_PENSION,
    BenefitContext,
    BenefitRule,
    Leg,
    Members,
    PensionTerms,
    own_leg,
)
from valuation.engine.benefits.reversion import BENEFIT as SPOUSE_PENSION
from valuation.engine.benefits.reversion import spouse_leg


def guarantee_months(bc: BenefitContext, m: Members) -> NDArray[np.int64] | None:
    """Grid month of each guarantee's end (0: none); None when the records carry no guarantees."""
    if "guarantee_end" not in m.frame.columns:
        return None
    g_end = np.asarray(m.frame["guarantee_end"].to_numpy(), dtype="datetime64[D]")
    g_years = (g_end - bc.valuation_date).astype("timedelta64[D]").astype(float) / 365.25
    return np.where(np.isnan(g_years), 0, bc.months(np.nan_to_num(g_years, nan=0.0)))


class PensionInPayment(BenefitRule):
    """Pensioners: own pension (certain to the guarantee end) and the spouse's reversion after it."""

    status = "pensioner"
    pensions = (MEMBER_PENSION, SPOUSE_PENSION)

    def terms(self, bc: BenefitContext, m: Members) -> PensionTerms:
        base = bc.base_amounts(m)
        ones = np.ones_like(base)
        return PensionTerms(base=base, start=np.zeros(m.n, dtype=np.int64), at_start=ones, at_start_full=ones,
                            guarantee=m.once("guarantee", lambda: guarantee_months(bc, m)))

    def legs(self, bc: BenefitContext, m: Members, terms: PensionTerms) -> list[Leg]:
        return [own_leg(bc, m, terms), spouse_leg(bc, m, terms)]
