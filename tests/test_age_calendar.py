"""One age calendar: the experience analysis's age last birthday and birthdays are the engine's
(:func:`valuation.survival.age_at`), checked day by day against the calendar definition.

Definition (common practice, stated in valuation/survival.py): a life attains age k on its k-th birthday;
a 29 February birthday falls on 1 March in a common year.
"""

from __future__ import annotations

from datetime import date, timedelta

import numpy as np

from valuation.experience.exposure import age_last_birthday, birthday
from valuation.survival import age_at


def _birthday(dob: date, k: int) -> date:
    """The k-th birthday by the definition above (hand-written, one date at a time)."""
    try:
        return dob.replace(year=dob.year + k)
    except ValueError:  # 29 February in a common year
        return date(dob.year + k, 3, 1)


def _age_last_birthday(dob: date, on: date) -> int:
    k = on.year - dob.year
    return k if _birthday(dob, k) <= on else k - 1


def test_age_last_birthday_day_by_day_matches_the_definition() -> None:
    births = [date(1960, 2, 29), date(1961, 2, 28), date(1955, 3, 1), date(1970, 12, 31), date(1980, 1, 1)]
    days = [date(2019, 12, 25) + timedelta(days=k) for k in range(800)]  # a leap day and two common years
    dob = np.array([b for b in births for _ in days], dtype="datetime64[D]")
    on = np.array(days * len(births), dtype="datetime64[D]")
    expected = [_age_last_birthday(b, d) for b in births for d in days]
    assert age_last_birthday(dob, on).tolist() == expected
    # the same function as the engine's convention, one valuation date at a time
    for d in (date(2020, 2, 28), date(2020, 2, 29), date(2021, 2, 28), date(2021, 3, 1)):
        mine = age_last_birthday(np.array(births, dtype="datetime64[D]"), np.full(len(births), d, "datetime64[D]"))
        assert mine.tolist() == age_at(np.array(births, dtype="datetime64[D]"), d, "last_birthday").tolist()


def test_birthdays_follow_the_29_february_rule() -> None:
    dob = np.array([date(1960, 2, 29)] * 3 + [date(1970, 7, 15)], dtype="datetime64[D]")
    got = birthday(dob, np.array([60, 61, 64, 50])).astype(object).tolist()
    assert got == [date(2020, 2, 29), date(2021, 3, 1), date(2024, 2, 29), date(2020, 7, 15)]


def test_exact_age_of_many_lives_is_the_date_by_date_age():
    """Many dates of birth at one date are aged once a distinct day and looked up: the numbers must be the
    date-by-date ones exactly (29 February births, missing dates and a wide span included)."""
    import numpy as np

    from valuation.survival import _exact_age, exact_age

    rng = np.random.default_rng(3)
    at = np.datetime64("2024-02-29")
    dob = (np.datetime64("1920-01-01") + rng.integers(0, 38_000, 20_000)).astype("datetime64[D]")
    dob[:50] = np.datetime64("1952-02-29")
    dob[::301] = np.datetime64("NaT")
    np.testing.assert_array_equal(exact_age(dob, at), _exact_age(dob, np.asarray(at)))
