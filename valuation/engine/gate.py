"""The gate between reading and reporting: a run that values no record, or that leaves out more records
than the basis allows, does not produce a trustee report without the user's say-so.
"""

from __future__ import annotations

from pathlib import Path

from valuation.errors import DataError, ExclusionsError


def check_exclusions(
    *, read: int, valued: int, excluded: int, path: str | Path, max_share: float, accept: bool,
) -> None:
    """Raise when nothing can be valued, or when the excluded share exceeds ``max_share``.

    Parameters
    ----------
    read, valued, excluded : int
        The run's reconciliation (read = valued + excluded).
    path : str or Path
        The member file, named in the message.
    max_share : float
        Largest share of the records read that may be excluded [fraction] (basis
        ``[thresholds] max_excluded_share``).
    accept : bool
        The user accepts a larger share (``--accept-exclusions``): the run goes on, and the reports show
        the exclusions at the top.

    Raises
    ------
    DataError
        No record could be valued (an empty file, or every record excluded).
    ExclusionsError
        More than ``max_share`` of the records were excluded and ``accept`` is false.
    """
    if valued == 0:
        what = "the file holds no member records" if read == 0 else (
            f"all {read:,} records were excluded because of data problems")
        raise DataError(f"nothing to value: {what}", file=path,
                        fix="list the problems with `valuation check BASIS MEMBERS --exceptions FILE`")
    share = excluded / read if read else 0.0
    if share > max_share and not accept:
        raise ExclusionsError(
            f"{excluded:,} of {read:,} records ({100 * share:.1f} %) were excluded because of data problems, "
            f"more than the basis allows ({100 * max_share:g} %, [thresholds] max_excluded_share)",
            file=path,
            fix="list the problems with `valuation check BASIS MEMBERS --exceptions FILE` and correct the data, "
                "or add --accept-exclusions to value the remaining records",
        )


__all__ = ["check_exclusions"]
