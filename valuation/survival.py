"""Ages at a date, cohort l_x and l at fractional ages (the survival the engine uses).

Everything here is a pure array function. Survival works on *cohort q rows*: a 2-D array ``q_rows`` of
shape ``(n_rows, n_ages)`` whose column ``j`` holds q at integer age ``j`` (ages start at 0) and whose
last column is 1.0 (the closing age). A life of exact age ``x0`` on row ``r`` survives to time ``t`` with
``tp = l(x0 + t) / l(x0)``, where ``l`` is the row's l_x interpolated between integer ages.

References
----------
.. [DHW] Dickson, D.C.M., Hardy, M.R. and Waters, H.R., *Actuarial Mathematics for Life Contingent
   Risks*, 2nd ed., Cambridge University Press, 2013: section 3.3 (fractional age assumptions) and
   chapter 9 (multiple lives).
.. [BGHJN] Bowers, N.L., Gerber, H.U., Hickman, J.C., Jones, D.A. and Nesbitt, C.J., *Actuarial
   Mathematics*, 2nd ed., Society of Actuaries, 1997: section 3.6 (fractional ages) and chapter 9.
"""

from __future__ import annotations

from datetime import date
from typing import Literal

import numpy as np
from numpy.typing import ArrayLike, NDArray

from valuation.errors import TableError

FractionalAge = Literal["udd", "constant_force"]
AgeConvention = Literal["exact", "last_birthday", "nearest_birthday"]

_FRACTIONAL: tuple[str, ...] = ("udd", "constant_force")
_CONVENTIONS: tuple[str, ...] = ("exact", "last_birthday", "nearest_birthday")


def _check_option(value: str, allowed: tuple[str, ...], name: str) -> None:
    if value not in allowed:
        raise ValueError(f"{name} must be one of {', '.join(allowed)}; got {value!r}")


# --------------------------------------------------------------------------------------------------
# Ages at a date
# --------------------------------------------------------------------------------------------------


def _anniversary(
    month_index: NDArray[np.int64], day: NDArray[np.int64], year_offset: NDArray[np.int64]
) -> NDArray[np.datetime64]:
    """The birthday in a given year as datetime64[D].

    ``month_index`` counts months since 1970-01 for the birth month, ``day`` is the day of the month
    (1-based) and ``year_offset`` the number of years after birth. A day past the end of its month rolls
    into the next month, so a 29 February birthday falls on 1 March in a common year.
    """
    months = (month_index + 12 * year_offset).astype("datetime64[M]")
    return months.astype("datetime64[D]") + (day - 1).astype("timedelta64[D]")


def birthday(dob: ArrayLike, years: ArrayLike) -> NDArray[np.datetime64]:
    """The date on which lives born on ``dob`` attain age ``years`` (whole years): the birthday in the
    year ``birth year + years``, a 29 February birthday falling on 1 March in a common year.

    References
    ----------
    Common practice (the 29 February rule is the tool's own stated rule, as in :func:`exact_age`).
    """
    d = np.asarray(dob, dtype="datetime64[D]")
    birth_month = d.astype("datetime64[M]")
    day = (d - birth_month.astype("datetime64[D]")).astype(np.int64) + 1
    return _anniversary(birth_month.astype(np.int64), day, np.asarray(years, dtype=np.int64))


def exact_age(dob: ArrayLike, at: date | np.datetime64 | ArrayLike) -> NDArray[np.float64]:
    """Exact age [years] at the date ``at`` of lives born on ``dob``.

    Exact age = completed years + (days since the last birthday) / (days from the last birthday to the
    next one). A birthday on 29 February falls on 1 March in a common year (common practice), so such a
    life's birthday-year from 1 March 2023 to 29 February 2024 has 366 days. Missing dates (NaT) give
    NaN. A date of birth after ``at`` gives a negative age; the member-data checks reject those before
    this function is reached.

    Parameters
    ----------
    dob : array_like of datetime64[D] (or ISO date strings / ``datetime.date``)
        Dates of birth.
    at : date, numpy.datetime64, or array_like of datetime64[D]
        The valuation date, or one date a life (the shape of ``dob``).

    Returns
    -------
    numpy.ndarray of float
        Exact age [years], the shape of ``dob``.

    References
    ----------
    Common practice (the day-count rule for a fraction of a birthday-year is the tool's own stated rule).
    """
    d = np.asarray(dob, dtype="datetime64[D]")
    a = np.asarray(at, dtype="datetime64[D]")
    if a.ndim == 0 and d.size > _BY_DAY_MIN:
        by_day = _exact_age_by_day(d, a)
        if by_day is not None:
            return by_day
    return _exact_age(d, a)


def _exact_age(d: NDArray[np.datetime64], a: NDArray[np.datetime64]) -> NDArray[np.float64]:
    """:func:`exact_age` worked out date by date."""
    missing = np.isnat(d)
    d_ok = np.where(missing, a, d)
    birth_month = d_ok.astype("datetime64[M]")
    month_index = birth_month.astype(np.int64)
    day = (d_ok - birth_month.astype("datetime64[D]")).astype(np.int64) + 1
    birth_year = d_ok.astype("datetime64[Y]").astype(np.int64)
    at_year = a.astype("datetime64[Y]").astype(np.int64)
    years = np.asarray(at_year - birth_year, dtype=np.int64)
    this_year = _anniversary(month_index, day, years)
    completed = np.where(this_year > a, years - 1, years)
    last = _anniversary(month_index, day, completed)
    nxt = _anniversary(month_index, day, completed + 1)
    frac = (a - last).astype(np.float64) / (nxt - last).astype(np.float64)
    age = completed.astype(np.float64) + frac
    return np.where(missing, np.nan, age)


#: From this many dates of birth on, :func:`exact_age` at one date works once a distinct day (the same
#: numbers, by a look-up).
_BY_DAY_MIN = 4096


def _exact_age_by_day(d: NDArray[np.datetime64], a: NDArray[np.datetime64]) -> NDArray[np.float64] | None:
    """:func:`exact_age` of many dates of birth at one date ``a``, computed once for each day from the
    earliest to the latest date of birth and looked up; None when that span is longer than the dates."""
    days = d.astype(np.int64)
    known = ~np.isnat(d)
    if not known.any():
        return None
    lo, hi = int(days[known].min()), int(days[known].max())
    if hi - lo + 1 > d.size:
        return None
    table = _exact_age(np.arange(lo, hi + 1).astype("datetime64[D]"), a)
    out = np.full(d.shape, np.nan)
    out[known] = table[days[known] - lo]
    return out


def age_at(
    dob: ArrayLike, at: date | np.datetime64 | ArrayLike, convention: AgeConvention = "exact"
) -> NDArray[np.float64]:
    """Age [years] at ``at`` under an age convention.

    ``"exact"`` is :func:`exact_age`; ``"last_birthday"`` its whole part (completed years);
    ``"nearest_birthday"`` the age at the nearer birthday, measured by the fraction of the birthday-year
    that has passed, with a life exactly half-way taken to the next birthday (common practice).

    Parameters
    ----------
    dob : array_like of datetime64[D]
        Dates of birth.
    at : date, numpy.datetime64, or array_like of datetime64[D]
        The valuation date, or one date a life.
    convention : {"exact", "last_birthday", "nearest_birthday"}
        The age convention.

    Returns
    -------
    numpy.ndarray of float
        Age [years]; whole numbers for the two birthday conventions.

    References
    ----------
    Common practice (age last birthday and age nearest birthday are the trade's usual rating conventions).
    """
    _check_option(convention, _CONVENTIONS, "convention")
    x = exact_age(dob, at)
    if convention == "exact":
        return x
    if convention == "last_birthday":
        return np.floor(x)
    return np.floor(x + 0.5)


# --------------------------------------------------------------------------------------------------
# Cohort l_x and interpolation between integer ages
# --------------------------------------------------------------------------------------------------


def _as_q_rows(q_rows: ArrayLike) -> NDArray[np.float64]:
    q = np.asarray(q_rows, dtype=np.float64)
    if q.ndim == 1:
        q = q[None, :]
    if q.ndim != 2 or q.shape[1] < 1:
        raise TableError(
            f"cohort q rows must be a 2-D array (rows x ages); got shape {q.shape}",
            fix="pass one row of q by integer age from 0 to the closing age for each cohort",
        )
    bad = ~np.isfinite(q) | (q < 0.0) | (q > 1.0)
    if bad.any():
        r, j = np.argwhere(bad)[0]
        raise TableError(
            f"q at age {j} is {float(q[r, j]):g}; expected a probability in [0, 1]",
            row=int(r),
            column=f"q[{j}]",
            fix="check the mortality table and its adjustments (percentage, rating, improvement)",
        )
    not_closed = q[:, -1] != 1.0
    if not_closed.any():
        r = int(np.flatnonzero(not_closed)[0])
        raise TableError(
            f"q at the closing age {q.shape[1] - 1} is {float(q[r, -1]):g}; expected 1.0",
            row=r,
            column=f"q[{q.shape[1] - 1}]",
            fix="close the table with q = 1 at its last age",
        )
    return q


def cohort_lx(q_rows: ArrayLike) -> NDArray[np.float64]:
    """Cohort survivors l_x at integer ages from cohort q rows, with l_0 = 1.

    l_{j+1} = l_j (1 - q_j) [DHW section 3.2; BGHJN section 3.3].

    Parameters
    ----------
    q_rows : array_like, shape (n_rows, n_ages)
        q at integer ages 0 .. n_ages - 1 for each cohort row; the last column must be 1.0.

    Returns
    -------
    numpy.ndarray, shape (n_rows, n_ages + 1)
        l at ages 0 .. n_ages [proportion of a radix of 1]; the last column is 0.

    Raises
    ------
    TableError
        If a q is not a probability or a row does not close with q = 1.

    References
    ----------
    [DHW] section 3.2; [BGHJN] section 3.3.
    """
    q = _as_q_rows(q_rows)
    lx = np.ones((q.shape[0], q.shape[1] + 1))
    np.cumprod(1.0 - q, axis=1, out=lx[:, 1:])
    return lx


def lx_at(
    lx: NDArray[np.float64],
    q_rows: ArrayLike,
    rows: ArrayLike,
    ages: ArrayLike,
    fractional: FractionalAge = "udd",
) -> NDArray[np.float64]:
    """l at fractional ages, interpolated between integer ages.

    With age y = j + s (j integer, 0 <= s < 1):

    - UDD: l(j + s) = l_j (1 - s q_j), linear in l [DHW section 3.3.1; BGHJN section 3.6].
    - constant force: l(j + s) = l_j (p_j)^s, linear in log l [DHW section 3.3.2; BGHJN section 3.6].

    Beyond the closing age l = 0; ages below 0 are treated as 0; a missing (NaN) age gives NaN.

    Parameters
    ----------
    lx : numpy.ndarray, shape (n_rows, n_ages + 1)
        Output of :func:`cohort_lx` for ``q_rows``.
    q_rows : array_like, shape (n_rows, n_ages)
        Cohort q rows.
    rows : array_like of int
        Row of each value; broadcasts with ``ages``.
    ages : array_like of float
        Ages [years].
    fractional : {"udd", "constant_force"}
        Fractional-age assumption.

    Returns
    -------
    numpy.ndarray
        l at the requested ages [proportion of a radix of 1], the broadcast shape of ``rows`` and
        ``ages``.

    References
    ----------
    [DHW] section 3.3; [BGHJN] section 3.6.
    """
    _check_option(fractional, _FRACTIONAL, "fractional")
    q = np.asarray(q_rows, dtype=np.float64)
    if q.ndim == 1:
        q = q[None, :]
    n_ages = q.shape[1]
    l_flat = np.ascontiguousarray(lx).reshape(-1)
    r = np.asarray(rows, dtype=np.intp)
    # clamp to [0, n_ages]: at n_ages (and beyond) j = n_ages - 1 and s = 1, where l_j p_j = 0
    y = np.clip(np.asarray(ages, dtype=np.float64), 0.0, float(n_ages))
    missing = np.isnan(y)
    if missing.any():
        y = np.where(missing, 0.0, y)
    j = np.minimum(y.astype(np.intp), n_ages - 1)  # floor, as y >= 0
    s = y - j
    at = r * (n_ages + 1) + j  # flat index into lx
    l_j = l_flat[at]
    if fractional == "udd":
        out = l_j + s * (l_flat[at + 1] - l_j)  # l_j (1 - s q_j) = l_j - s d_j
    else:
        p_j = 1.0 - np.ascontiguousarray(q).reshape(-1)[r * n_ages + j]
        # p^s with 0^0 = 1 and 0^s = 0 for s > 0 (numpy's power does this)
        out = l_j * np.power(p_j, s)
    return np.where(missing, np.nan, out) if missing.any() else out
