"""Parametric mortality laws (Gompertz-Makeham) and tables built from them.

References
----------
.. [DHW] Dickson, D.C.M., Hardy, M.R. and Waters, H.R., *Actuarial Mathematics for Life Contingent
   Risks*, 2nd ed., Cambridge University Press, 2013, section 2.7 (Makeham's law) and Appendix D
   (the Standard Ultimate Life Table).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray


@dataclass(frozen=True)
class Makeham:
    """Makeham's law of mortality, mu_x = A + B c^x [per annum].

    With ``A = 0`` it is Gompertz's law.

    References
    ----------
    [DHW] section 2.7, eq. (2.28)-(2.29).
    """

    A: float
    B: float
    c: float

    def force(self, x: ArrayLike) -> NDArray[np.float64]:
        """Force of mortality mu_x [per annum] at exact age ``x`` [years]."""
        x = np.asarray(x, dtype=float)
        return self.A + self.B * self.c**x

    def tpx(self, x: ArrayLike, t: ArrayLike) -> NDArray[np.float64]:
        """Survival probability tp_x = exp(-A t - B c^x (c^t - 1) / ln c) [DHW eq. (2.29)].

        ``x`` is the exact age [years] and ``t`` the term [years]; both broadcast.
        """
        x = np.asarray(x, dtype=float)
        t = np.asarray(t, dtype=float)
        return np.exp(-self.A * t - self.B * self.c**x * (self.c**t - 1.0) / np.log(self.c))

    def qx(self, x: ArrayLike) -> NDArray[np.float64]:
        """One-year death probability q_x = 1 - 1p_x at integer or exact age ``x`` [years]."""
        return 1.0 - self.tpx(x, 1.0)


#: The law behind the Standard Ultimate Life Table, [DHW] Appendix D: A = 0.00022, B = 2.7e-6, c = 1.124.
SULT_LAW = Makeham(A=0.00022, B=2.7e-6, c=1.124)

#: Illustrative Gompertz-Makeham laws with parameters of our own choosing (not fitted to any population);
#: used only by the demo scheme. Chosen so that, on the demo basis (pensioner mortality with its
#: improvements), cohort life expectancy at 65 is about 22.0 years for men and 24.8 for women: within the
#: ranges seen for occupational pension schemes today (common practice: men 21-23.5, women 23-25.5 years,
#: women 1.5-3.5 years longer), pinned by tests/test_mortality_tables.py.
DEMO_LAW_MALE = Makeham(A=0.0005, B=2.1e-5, c=1.1)
DEMO_LAW_FEMALE = Makeham(A=0.0003, B=1.9e-5, c=1.1)
