"""A deferred pension: revalued to retirement per tranche, part commuted for cash, then paid for life.

The pension on the record is revalued in deferment by its tranche's rule up to the retirement age on the
record (rounded to the month), the basis's share is commuted for cash at retirement (``lump_sums.py``),
and the rest is paid for life with the tranche's increases in payment, the first increase under the
basis's first-increase rule. A spouse's pension is paid on a death before or after retirement
(``reversion.py``): on a death before retirement it is the pension revalued to the date of death.

References
----------
.. [DHW] Dickson, Hardy & Waters, *Actuarial Mathematics for Life Contingent Risks*, 2nd ed. (2013),
   section 5.8 (deferred annuities), ch. 10 (pension plans: revaluation, commutation).
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

from valuation.engine.benefits.base import (
    MEMBER_PENSION,
    BenefitContext,
    BenefitRule,
    Leg,
    Lump,
    Members,
    PensionTerms,
    own_leg,
)
from valuation.engine.benefits.lump_sums import BENEFIT as LUMP_SUM
from valuation.engine.benefits.lump_sums import commutation, keep_after_commutation
from valuation.engine.benefits.reversion import BENEFIT as SPOUSE_PENSION
from valuation.engine.benefits.reversion import spouse_leg


def retirement_month(bc: BenefitContext, m: Members) -> NDArray[np.int64]:
    """Grid month of retirement: the record's retirement age, or now if it has passed."""
    def make() -> NDArray[np.int64]:
        nra = m.frame["retirement_age"].to_numpy().astype(float)
        return bc.months(np.maximum(nra - m.x0, 0.0))

    return m.once("retirement_month", make)


class DeferredPension(BenefitRule):
    """Deferred members: revalued pension from retirement, less the commuted share; spouse's reversion;
    commutation cash."""

    status = "deferred"
    pensions = (MEMBER_PENSION, SPOUSE_PENSION)
    lump_sums = (LUMP_SUM,)

    def terms(self, bc: BenefitContext, m: Members) -> PensionTerms:
        start = retirement_month(bc, m)
        full = bc.revalue[:, start].T  # (N, J)
        return PensionTerms(base=bc.base_amounts(m), start=start, at_start=full * keep_after_commutation(bc),
                            at_start_full=full, starts_later=True, growth=bc.revalue)

    def legs(self, bc: BenefitContext, m: Members, terms: PensionTerms) -> list[Leg]:
        return [own_leg(bc, m, terms), spouse_leg(bc, m, terms)]

    def lumps(self, bc: BenefitContext, m: Members, terms: PensionTerms) -> list[Lump]:
        comm = commutation(bc, m, terms)
        return [] if comm is None else [comm]
