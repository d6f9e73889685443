"""Expected against actual deaths: the whole analysis, from files to an :class:`ExperienceResult`.

References
----------
.. [BP] Benjamin, B. and Pollard, J.H., *The Analysis of Mortality and Other Actuarial Statistics*,
   3rd ed., 1993 (exposed to risk; actual versus expected deaths).
.. [G] Garwood, F. (1936), *Biometrika* 28, 437-442 (exact Poisson limits).
"""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING, cast

import polars as pl

if TYPE_CHECKING:
    from valuation.basis.model import Basis
    from valuation.members.data import MemberData
from valuation.experience.cells import RateLookup, build_cells
from valuation.experience.checks import EXCEPTION_SCHEMA, check_events, empty_exceptions
from valuation.experience.events import read_events_with_headers
from valuation.experience.implied import (
    TableKey,
    ValuedScheme,
    by_table_frame,
    implied_percentages,
    liability_effect,
    own_table_key,
)
from valuation.experience.result import TABLE_COLUMNS, ExperienceResult
from valuation.experience.settings import ExperienceSettings
from valuation.experience.summary import (
    AERow,
    ExperienceRecords,
    ExperienceSummary,
    RecordCounts,
    SettingValue,
)
from valuation.experience.tables import (
    DIMENSIONS,
    ae_by_table,
    ae_overall_at_risk,
    ae_table,
    default_band_edges,
    pension_band_labels,
)
from valuation.vocabulary import GROUP_OF_STATUS


def _conform(df: pl.DataFrame) -> pl.DataFrame:
    return df.select(
        [
            pl.col(c).cast(t) if c in df.columns else pl.lit(None, t).alias(c)
            for c, t in EXCEPTION_SCHEMA.items()
        ]
    )


def _member_headers(path: str | Path, basis: Basis) -> dict[str, str]:
    """Our column name -> the member file's header as written (for the exceptions' ``file_column``).

    Read from the file's header line where that is cheap (CSV, Parquet); otherwise the basis mapping's
    header, or our own name.
    """
    from valuation.errors import ValuationError
    from valuation.members.readers import header_targets, read_header

    try:
        written = read_header(path)
        return {ours: header.replace("\ufeff", "") for header, ours in header_targets(
            written, basis.mapping, Path(path)).items()}
    except (ValuationError, OSError, ValueError):
        return {ours: theirs for theirs, ours in basis.mapping.columns.items()}


def analyse_records(
    records: pl.DataFrame,
    deaths: pl.DataFrame,
    exits: pl.DataFrame | None,
    lookup: RateLookup,
    settings: ExperienceSettings,
    *,
    excluded_ids: pl.Series | None = None,
    member_exceptions: pl.DataFrame | None = None,
    member_counts: RecordCounts | None = None,
    files: dict[str, str] | None = None,
    date_format: str | None = None,
    table_key: TableKey | None = None,
    headers: dict[str, dict[str, str]] | None = None,
) -> ExperienceResult:
    """The analysis on frames already read (no liability effect: see :func:`analyse_experience`).

    Parameters
    ----------
    records
        Valued start membership: ``row, member_id, status, sex, date_of_birth`` (Date), ``pension``
        [currency p.a.].
    deaths, exits
        Frames from :func:`valuation.experience.events.read_events`.
    lookup
        ``lookup(group, sex)`` -> mortality with ``q(ages, years)``, ``mu(ages, years)`` (and ``percentage``).
    settings
        The analysis settings.
    excluded_ids, member_exceptions, member_counts
        What reading the start membership excluded, its exceptions and its ``read/valued/excluded`` counts.
    files
        Display names: ``members``, ``deaths``, ``exits``.
    date_format
        The accepted non-ISO date pattern (quoted in messages).
    table_key
        ``table_key(group, sex)`` -> the mortality table entry the pair uses, ``"mortality.<group>.<sex>"``
        (``Basis.mortality_key``); by default every group and sex counts as its own entry.
    headers
        Our column name -> the file's header as written, for ``members``, ``deaths`` and ``exits``
        (named in the exceptions' ``file_column``).

    References
    ----------
    [BP] actual versus expected deaths by lives and by amounts; [G] exact Poisson limits; credibility
    as in :mod:`valuation.experience.credibility`.
    """
    files = {"members": "", "deaths": "", "exits": "", **(files or {})}
    headers = {"members": {}, "deaths": {}, "exits": {}, **(headers or {})}
    table_key = table_key or own_table_key
    excluded_ids = excluded_ids if excluded_ids is not None else pl.Series("member_id", [], pl.String)
    checked = check_events(
        deaths,
        exits,
        valued_ids=records["member_id"],
        excluded_ids=excluded_ids,
        period_start=settings.period_start,
        period_end=settings.period_end,
        deaths_file=files["deaths"],
        exits_file=files["exits"],
        members_file=files["members"],
        date_format=date_format,
        deaths_headers=headers["deaths"],
        exits_headers=headers["exits"],
    )
    edges = settings.pension_band_edges
    if edges is None:
        edges = default_band_edges(records["pension"])
    bands, band_order = pension_band_labels(records["pension"], edges)
    members = records.select(
        pl.col("row").cast(pl.Int64),
        pl.col("member_id").cast(pl.String),
        pl.col("status").replace_strict(GROUP_OF_STATUS, default=pl.col("status")).alias("group"),
        pl.col("sex"),
        pl.col("date_of_birth"),
        pl.col("pension").cast(pl.Float64),
    ).with_columns(bands)
    cells, closing = build_cells(
        members,
        checked.deaths,
        checked.exits,
        lookup,
        settings,
        members_file=files["members"],
        date_of_birth_header=headers["members"].get("date_of_birth", "date_of_birth"),
    )
    table = ae_table(
        cells, confidence=settings.confidence, overdispersion=settings.overdispersion, band_order=band_order
    )
    overall = table.filter(pl.col("dimension") == "overall")
    pairs = [tuple(r) for r in members.select("group", "sex").unique().sort(["group", "sex"]).iter_rows()]
    keys = pl.DataFrame(
        {
            "group": [g for g, _ in pairs],
            "sex": [x for _, x in pairs],
            "table": [table_key(g, x) for g, x in pairs],  # one a (group, sex) pair, never one a member
        },
        schema={"group": pl.String, "sex": pl.String, "table": pl.String},
    )
    table_of = (
        cells.select(pl.col("group").cast(pl.String), pl.col("sex").cast(pl.String))
        .join(keys, on=["group", "sex"], how="left", maintain_order="left")["table"]
        if cells.height
        else pl.Series("table", [], pl.String)
    )
    by_table = ae_by_table(
        cells, table_of, confidence=settings.confidence, overdispersion=settings.overdispersion
    )
    implied = implied_percentages(
        by_table,
        overall.row(0, named=True) if overall.height else None,
        ae_overall_at_risk(cells),
        pairs,  # type: ignore[arg-type]
        lookup,
        table_key,
        settings,
    )
    # the liability effect needs the valuation member file: see analyse_experience
    implied.update(liability_effect(None, None, []))

    exceptions = pl.concat(
        [
            _conform(member_exceptions if member_exceptions is not None else empty_exceptions()),
            checked.exceptions,
            closing,
        ],
        how="vertical",
    )
    d, x = checked.counts["deaths"], checked.counts["exits"]
    in_cells = int(cells["deaths"].sum())
    counts: ExperienceRecords = {
        "members": member_counts or {"read": records.height, "valued": records.height, "excluded": 0},
        "deaths": {
            "read": d["read"], "counted": d["counted"], "excluded": d["excluded"], "in_cells": in_cells,
            "no_amounts_weight": int(cells.filter((pl.col("deaths") > 0) & (pl.col("actual_amounts") == 0)).height),
            "left_out_at_closing_age": d["counted"] - in_cells,
        },
        "exits": {"read": x["read"], "applied": x["applied"], "excluded": x["excluded"]},
    }
    public = table.select(TABLE_COLUMNS)
    summary: ExperienceSummary = {
        "settings": cast(dict[str, SettingValue], settings.as_dict()),
        "pension_band_edges": list(edges),
        "amounts_weight": (
            "each life weighted by its pension [currency p.a.]: actual deaths by the pension at death when "
            "given, else the record's pension; lives with no pension in the start data (e.g. actives) have "
            "no weight in actual or expected amounts"
        ),
        "records": counts,
        "overall": cast(AERow, public.filter(pl.col("dimension") == "overall").row(0, named=True))
        if overall.height else None,
        "by_group": {
            dim: cast(list[AERow], public.filter(pl.col("dimension") == dim).drop("dimension").to_dicts())
            for dim in DIMENSIONS[1:]
        },
        "implied": implied,
        "exceptions": {
            "total": exceptions.height,
            "excluded": int((exceptions["severity"] == "excluded").sum()),
            "warning": int((exceptions["severity"] == "warning").sum()),
        },
    }
    return ExperienceResult(
        settings=settings,
        table=public,
        implied=implied,
        exceptions=exceptions,
        summary=summary,
        cells=cells,
        by_table=by_table_frame(implied),
    )


def analyse_experience(
    members_path: str | Path,
    deaths_path: str | Path,
    basis_path_or_basis: Basis | str | Path,
    settings: ExperienceSettings,
    *,
    exits_path: str | Path | None = None,
    valued: ValuedScheme | None = None,
    start_data: MemberData | None = None,
) -> ExperienceResult:
    """Actual against expected deaths over a period, with the implied mortality level.

    Parameters
    ----------
    members_path
        Membership at the start of the period (same schema and basis mapping as a valuation file).
    deaths_path
        Deaths in the period: member_id, date_of_death, optional pension_at_death [currency p.a.].
    basis_path_or_basis
        The basis (TOML path or a loaded ``Basis``): its mortality for each status group and sex gives
        the expected deaths; its mapping gives the date format and column names.
    settings
        Period, exposure method, confidence level, overdispersion, late-reporting allowance.
    exits_path
        Other exits (member_id, exit_date, reason); exposure stops at the exit.
    valued
        The valuation at the period end (:class:`~valuation.experience.implied.ValuedScheme`: its
        liability, and a way to value the same records on another basis): when given, the liability is
        re-valued on the basis with each mortality table entry's percentage replaced by its own
        credibility-weighted implied percentage; when not, the liability effect is skipped and the result
        says so. The experience analysis never reads or values member files itself.
    start_data
        The start membership already read (as at ``settings.period_start``), so that it is not read again.

    Returns
    -------
    ExperienceResult

    References
    ----------
    [BP] exposed to risk and actual versus expected deaths; [G] exact Poisson limits; credibility as in
    :mod:`valuation.experience.credibility`.
    """
    from valuation.basis import load_basis
    from valuation.members import read_members

    basis = (
        load_basis(basis_path_or_basis)
        if isinstance(basis_path_or_basis, str | Path)
        else basis_path_or_basis
    )
    mapping = basis.mapping
    date_format = mapping.date_format
    column_map = dict(mapping.columns)
    # the start membership is checked as at the period start (ages, dates of birth after that date)
    data = start_data if start_data is not None else read_members(
        members_path, basis.model_copy(update={"valuation_date": settings.period_start}))
    deaths, deaths_headers = read_events_with_headers(
        deaths_path, "deaths", date_format=date_format, column_map=column_map
    )
    exits, exits_headers = (
        read_events_with_headers(exits_path, "exits", date_format=date_format, column_map=column_map)
        if exits_path
        else (None, {})
    )
    member_exc = data.exceptions
    excluded_ids = (
        member_exc.filter(pl.col("severity") == "excluded")["member_id"]
        if member_exc.height
        else pl.Series([], dtype=pl.String)
    )
    result = analyse_records(
        data.records,
        deaths,
        exits,
        basis.mortality,
        settings,
        excluded_ids=excluded_ids,
        member_exceptions=member_exc,
        member_counts={"read": data.read, "valued": data.valued, "excluded": data.excluded},
        files={"members": str(members_path), "deaths": str(deaths_path), "exits": str(exits_path or "")},
        date_format=date_format,
        table_key=basis.mortality_key,
        headers={
            "members": _member_headers(members_path, basis),
            "deaths": deaths_headers,
            "exits": exits_headers,
        },
    )
    effect = liability_effect(valued, basis, result.implied["by_table"])
    result.implied.update(effect)
    result.summary["implied"] = result.implied
    return result
