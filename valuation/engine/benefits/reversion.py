"""Spouse's reversionary pension, on the member's death before or after the pension starts.

The spouse is the one on the record (known date of birth; married with certainty) or an assumed spouse
(the basis's proportion married by the member's sex, and its age difference). The spouse's pension is
the record's (or the basis's) fraction of the member's pension. From the start of the member's pension
(after any guarantee) it follows the member's pension; on a death before the start (a deferred or active
member) it is fixed at the death by ``PensionTerms.growth`` (refined by withdrawal and the service
attribution) and then receives the increases in payment of its tranche.

References
----------
.. [DHW] Dickson, Hardy & Waters, *Actuarial Mathematics for Life Contingent Risks*, 2nd ed. (2013),
   section 9.5 (reversionary annuities, a_{x|y} = a_y - a_xy, independent lives).
.. IAS 19 *Employee Benefits* (IASB), para 70 (attribution of a benefit on death to service).
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

from valuation.engine.benefits.base import BenefitContext, Leg, Members, PensionTerms
from valuation.engine.context import MAX_AGE
from valuation.survival import age_at
from valuation.vocabulary import SEXES, Benefit

#: The benefit name this module's legs carry.
BENEFIT: Benefit = "spouse_pension"

#: Column a caller may add so that the known spouse's age is computed once for every scenario.
SPOUSE_AGE_COLUMN = "_spouse_age_at_valuation"


def spouse_ages(bc: BenefitContext, m: Members) -> tuple[NDArray[np.bool_], NDArray[np.float64]]:
    """Whether the spouse is on the record, and the spouse's exact age [years] (assumed where not)."""
    df, basis = m.frame, bc.basis
    male = m.sex == SEXES[0]
    diff = float(basis.spouse.age_difference)
    assumed = np.where(male, m.x0 - diff, m.x0 + diff)
    if "spouse_date_of_birth" in df.columns:
        sp_dob = np.asarray(df["spouse_date_of_birth"].to_numpy(), dtype="datetime64[D]")
        known = ~np.isnat(sp_dob)
        if SPOUSE_AGE_COLUMN in df.columns:
            y_known = np.nan_to_num(df[SPOUSE_AGE_COLUMN].to_numpy().astype(float))
        else:
            y_known = np.asarray(age_at(np.where(known, sp_dob, m.dob), bc.valuation_date,
                                        basis.age_convention), dtype=float)
        y0 = np.where(known, y_known, assumed)
    else:
        known = np.zeros(m.n, dtype=bool)
        y0 = assumed
    return known, np.clip(y0, 0.0, MAX_AGE + 0.999)


def spouse_leg(bc: BenefitContext, m: Members, terms: PensionTerms) -> Leg:
    """The spouse's reversionary pension leg for members on ``terms``.

    References
    ----------
    [DHW] section 9.5 (reversionary annuity on independent lives); IAS 19 para 70.
    """
    rows_y, y0, share = m.once("spouse", lambda: _spouse(bc, m))
    return Leg(
        benefit=BENEFIT, kind="reversion", amount=terms.base * share[:, None], rows_x=m.rows_x, x0=m.x0,
        start=terms.start, at_start=terms.at_start_full,
        first_increase=bc.first_increase if terms.starts_later else None, guarantee=terms.guarantee,
        growth=terms.growth, exits=terms.exits, service=terms.service, rows_y=rows_y, y0=y0,
    )


def _spouse(bc: BenefitContext, m: Members) -> tuple[NDArray[np.int64], NDArray[np.float64], NDArray[np.float64]]:
    """The spouse's survival row and age, and the member's pension share the spouse would get (proportion
    married times the spouse's fraction)."""
    basis = bc.basis
    male = m.sex == SEXES[0]
    sp_sex = np.where(male, SEXES[1], SEXES[0])
    known, y0 = spouse_ages(bc, m)
    married = basis.spouse.proportion_married
    pm = np.where(known, 1.0, np.where(male, married[SEXES[0]], married[SEXES[1]]))
    frac = m.column("spouse_fraction")
    if frac is None:
        frac = np.full(m.n, np.nan)
    frac = np.where(np.isnan(frac), float(basis.spouse.fraction), frac)
    return bc.rows("spouse", sp_sex, y0), y0, pm * frac
