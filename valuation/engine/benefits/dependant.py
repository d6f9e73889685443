"""A dependant's pension in payment: for life, or to an end age (a child's pension).

The pension on the record (by tranche) is paid with its tranche's increases in payment while the
dependant lives and, where the record gives ``pension_end_age``, until that age. No further reversion.

References
----------
.. [DHW] Dickson, Hardy & Waters, *Actuarial Mathematics for Life Contingent Risks*, 2nd ed. (2013),
   eq. (5.12) (whole life annuity) and section 5.5 (temporary annuities).
"""

from __future__ import annotations

import numpy as np

from valuation.engine.benefits.base import (
    MEMBER_PENSION,
    BenefitContext,
    BenefitRule,
    Leg,
    Members,
    PensionTerms,
    own_leg,
)


class DependantPension(BenefitRule):
    """Dependants: own pension for life or to the end age; no spouse's pension."""

    status = "dependant"
    pensions = (MEMBER_PENSION,)

    def terms(self, bc: BenefitContext, m: Members) -> PensionTerms:
        base = bc.base_amounts(m)
        ones = np.ones_like(base)
        stop = None
        end_age = m.column("pension_end_age")
        if end_age is not None:
            stop = np.where(np.isnan(end_age), bc.ctx.months, bc.months(np.nan_to_num(end_age) - m.x0))
        return PensionTerms(base=base, start=np.zeros(m.n, dtype=np.int64), at_start=ones, at_start_full=ones,
                            stop=stop)

    def legs(self, bc: BenefitContext, m: Members, terms: PensionTerms) -> list[Leg]:
        return [own_leg(bc, m, terms)]
