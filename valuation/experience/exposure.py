"""Exposed to risk split into (member, age last birthday, calendar year) cells, fully vectorised.

Day-count convention (stated once, used everywhere in the experience analysis):

* A member observed from ``entry`` to ``end`` is exposed on the days d with entry < d <= end, so two
  valuation dates 31 March 2021 and 31 March 2024 cover 1 April 2021 to 31 March 2024 inclusive. A death
  on day d ends observation with day d included.
* Exposure [years] = number of exposed days / 365.25.
* Each exposed day carries the member's age last birthday on that day and that day's calendar year. The
  age changes on the birthday itself; a 29 February birthday falls on 1 March in other years.

References
----------
.. [BP] Benjamin, B. and Pollard, J.H., *The Analysis of Mortality and Other Actuarial Statistics*,
   3rd ed., 1993, chapter on exposed to risk (central and initial exposed to risk, rate intervals).
.. [CMI] Continuous Mortality Investigation, Working Paper 34 (2008), on the calculation of exposure
   (lives exposed day by day, split at birthdays and calendar-year boundaries).
"""

from __future__ import annotations

from typing import cast

import numpy as np
from numpy.typing import NDArray

from valuation.survival import age_at
from valuation.survival import birthday as survival_birthday

#: Days in a year for the exposure day count [days].
DAYS_PER_YEAR: float = 365.25

Dates = NDArray[np.datetime64]
Ints = NDArray[np.int64]


def _as_days(d: object) -> Dates:
    return np.asarray(d, dtype="datetime64[D]")


def ymd(d: object) -> tuple[Ints, Ints, Ints]:
    """Calendar year, month (1-12) and day of month of datetime64[D] dates."""
    d = _as_days(d)
    months = d.astype("datetime64[M]")
    year = d.astype("datetime64[Y]").astype(np.int64) + 1970
    month = months.astype(np.int64) % 12 + 1
    day = (d - months.astype("datetime64[D]")).astype(np.int64) + 1
    return year, month, day


def make_dates(year: Ints, month: Ints, day: Ints) -> Dates:
    """Dates from year, month, day; a day past the month's end rolls into the next month (29 Feb -> 1 Mar)."""
    year = np.asarray(year, dtype=np.int64)
    month = np.asarray(month, dtype=np.int64)
    day = np.asarray(day, dtype=np.int64)
    first = (year - 1970).astype("datetime64[Y]").astype("datetime64[M]") + (month - 1)
    return cast(Dates, first.astype("datetime64[D]") + (day - 1))


def age_last_birthday(dob: object, on: object) -> Ints:
    """Integer age last birthday [years] on the given dates (29 February birthdays attained on 1 March):
    the engine's age calendar, :func:`valuation.survival.age_at` with ``"last_birthday"``.

    References
    ----------
    Common practice (age last birthday as the rate interval's age label); [BP] chapter on exposed to risk.
    """
    return age_at(_as_days(dob), _as_days(on), "last_birthday").astype(np.int64)


def birthday(dob: object, age: Ints) -> Dates:
    """Date on which a life born on ``dob`` attains integer ``age`` [years] (:func:`valuation.survival.birthday`)."""
    return survival_birthday(_as_days(dob), age)


def _ranges(lo: Ints, hi: Ints) -> tuple[Ints, Ints]:
    """For each i the integers lo_i..hi_i - 1: returns (owner index, value), concatenated."""
    n = np.maximum(hi - lo, 0)
    owner = np.repeat(np.arange(len(n), dtype=np.int64), n)
    starts = np.cumsum(n) - n
    values = lo[owner] + (np.arange(int(n.sum()), dtype=np.int64) - starts[owner])
    return owner, values


def explode_exposure(dob: object, entry: object, end: object) -> dict[str, NDArray]:
    """Split each member's observation (entry, end] into (age last birthday, calendar year) cells.

    Parameters
    ----------
    dob
        Dates of birth, datetime64[D], shape (n,).
    entry
        Start of observation (exclusive), datetime64[D], shape (n,).
    end
        End of observation (inclusive: death, exit or period end), datetime64[D], shape (n,). Members with
        end <= entry contribute no cells.

    Returns
    -------
    dict of 1-D arrays, one entry a cell, sorted by member then date:
        ``member`` (index into the inputs), ``age`` [years, last birthday], ``year`` [calendar year],
        ``days`` [days], ``exposure`` [years] = days / 365.25.

    References
    ----------
    [BP] central exposed to risk for the rate interval "age last birthday x"; [CMI] exposure counted in
    days and split at birthdays and calendar-year boundaries.
    """
    dob = _as_days(dob)
    entry = _as_days(entry)
    end = _as_days(end)
    n = len(dob)
    first = entry + 1
    live = end >= first
    a0 = age_last_birthday(dob, first)
    a1 = np.where(live, age_last_birthday(dob, end), a0)
    y0 = ymd(first)[0]
    y1 = np.where(live, ymd(end)[0], y0)

    # Break points: the first day, each birthday after it, each 1 January after it, the day after the end.
    idx = np.arange(n, dtype=np.int64)
    b_owner, b_age = _ranges(a0 + 1, a1 + 1)
    j_owner, j_year = _ranges(y0 + 1, y1 + 1)
    owners = np.concatenate([idx[live], b_owner, j_owner, idx[live]])
    points = np.concatenate(
        [
            first[live],
            birthday(dob[b_owner], b_age),
            make_dates(j_year, np.ones_like(j_year), np.ones_like(j_year)),
            end[live] + 1,
        ]
    )
    order = np.lexsort((points, owners))
    owners = owners[order]
    points = points[order]
    same = owners[1:] == owners[:-1]
    seg_start = points[:-1][same]
    seg_days = (points[1:] - points[:-1]).astype(np.int64)[same]
    seg_owner = owners[:-1][same]
    keep = seg_days > 0  # a birthday on 1 January gives a zero-length piece
    seg_start, seg_days, seg_owner = seg_start[keep], seg_days[keep], seg_owner[keep]
    return {
        "member": seg_owner,
        "age": age_last_birthday(dob[seg_owner], seg_start),
        "year": ymd(seg_start)[0],
        "days": seg_days,
        "exposure": seg_days / DAYS_PER_YEAR,
    }


def initial_extension_days(dob: object, death: object) -> Ints:
    """Days from a death to the end of its year of age (the day before the next birthday) [days].

    Initial exposed to risk = central exposed to risk + this extension for each death, so that deaths
    carry exposure to the end of the rate interval and pair with q.

    References
    ----------
    [BP] chapter on exposed to risk: initial exposed to risk E_x = E^c_x + (time from death to the end
    of the rate year) summed over deaths, for use with q_x (binomial model).
    """
    dob = _as_days(dob)
    death = _as_days(death)
    next_bd = birthday(dob, age_last_birthday(dob, death) + 1)
    return (next_bd - death).astype(np.int64) - 1
