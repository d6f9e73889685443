"""The headline results of a run as typed objects: the contract of ``summary.json``.

:class:`RunSummary` holds every key of ``summary.json`` as an attribute. ``RunSummary.from_json(d)`` reads
the dictionary the engine assembles (or a ``summary.json`` read back), checking every key and value on
the way in; :meth:`RunSummary.to_json` gives the same dictionary back, key for key and in the same order,
so ``summary.json`` and ``manifest.json`` are written from it unchanged. A key the contract does not know
and a key it needs but does not find are both errors that name the key's path.

Money is [currency], rates are annual effective decimals, durations and expectancies [years]. A figure
that is undefined (the single equivalent rate of a scheme with no payments) is NaN here and ``null`` in
the JSON.

Two parts are kept as free-form JSON objects (typed ``Mapping[str, JsonValue]``), because their keys are
not this module's to fix: the basis as loaded (``manifest.basis``, the basis model's own dump, documented
with the basis file) and the settings the engine was called with (``manifest.settings``).
"""

from __future__ import annotations

import math
import numbers
from collections.abc import Mapping
from dataclasses import dataclass, field, fields, is_dataclass
from datetime import date
from typing import Literal, TypeAlias, TypeVar

from valuation.vocabulary import (
    SENSITIVITY_KINDS,
    SEXES,
    STATUSES,
    SensitivityKind,
    Sex,
    Status,
)

__all__ = [
    "LUMP_SUMS", "ActiveMeasures", "Assumptions", "DeathsRow", "Duration", "ExpectedDeaths", "JsonValue",
    "LifeExpectancyRow", "Liability", "Manifest", "Records", "RunSummary", "SensitivityRow",
    "StatusCounts",
]

#: A value of JSON: what ``json.loads`` gives.
JsonValue: TypeAlias = "None | bool | int | float | str | list[JsonValue] | dict[str, JsonValue]"

#: The key of ``liability.by_tranche`` that holds the lump sums (cash at retirement, death in service),
#: which belong to no tranche.
LUMP_SUMS = "lump_sums"

#: A life expectancy's basis: cohort (with future improvements) or period (this year's rates).
ExpectancyBasis = Literal["cohort", "period"]
EXPECTANCY_BASES: tuple[ExpectancyBasis, ...] = ("cohort", "period")

#: Field metadata: the key is left out of the JSON when the value is None (and may be absent on reading).
_OPTIONAL = {"optional": True}

_T = TypeVar("_T", bound=str)


class _Object:
    """One JSON object being read: typed getters that name the key's path when a value is missing or of
    the wrong kind, and :meth:`done`, which refuses keys the contract does not know."""

    def __init__(self, value: object, path: str) -> None:
        if not isinstance(value, Mapping):
            raise ValueError(f"summary: {path or 'the summary'} should be an object (a JSON {{...}}), "
                             f"not {_kind(value)}")
        self.d: Mapping[object, object] = value
        self.path = path
        self.seen: set[str] = set()

    def at(self, key: str) -> str:
        return f"{self.path}.{key}" if self.path else key

    def has(self, key: str) -> bool:
        return key in self.d

    def get(self, key: str) -> object:
        if key not in self.d:
            raise ValueError(f"summary: {self.at(key)} is missing")
        self.seen.add(key)
        return self.d[key]

    def number(self, key: str) -> float:
        return _float(self.get(key), self.at(key))

    def whole(self, key: str) -> int:
        return _int(self.get(key), self.at(key))

    def text(self, key: str) -> str:
        return _str(self.get(key), self.at(key))

    def flag(self, key: str) -> bool:
        value = self.get(key)
        if not isinstance(value, bool):
            raise ValueError(f"summary: {self.at(key)} should be true or false, not {_kind(value)}")
        return value

    def obj(self, key: str) -> _Object:
        return _Object(self.get(key), self.at(key))

    def rows(self, key: str) -> list[_Object]:
        return [_Object(v, f"{self.at(key)}[{i}]") for i, v in enumerate(_list(self.get(key), self.at(key)))]

    def texts(self, key: str) -> tuple[str, ...]:
        path = self.at(key)
        return tuple(_str(v, f"{path}[{i}]") for i, v in enumerate(_list(self.get(key), path)))

    def amounts(self, key: str) -> dict[str, float]:
        o = self.obj(key)
        return {_str(k, o.path): o.number(_str(k, o.path)) for k in list(o.d)}

    def literal(self, key: str, options: tuple[_T, ...]) -> _T:
        return _literal(self.get(key), options, self.at(key))

    def table(self, key: str) -> dict[str, JsonValue]:
        """A free-form JSON object, copied."""
        value = _json(self.get(key), self.at(key))
        if not isinstance(value, dict):
            raise ValueError(f"summary: {self.at(key)} should be an object (a JSON {{...}}), not {_kind(value)}")
        return value

    def done(self) -> None:
        unknown = [str(k) for k in self.d if k not in self.seen]
        if unknown:
            raise ValueError(f"summary: {', '.join(self.at(k) for k in unknown)} is not part of the summary's "
                             "contract (valuation/engine/summary.py lists every key)")


def _kind(value: object) -> str:
    names = {type(None): "null", bool: "true or false", str: "text", list: "a list", dict: "an object"}
    return next((n for t, n in names.items() if isinstance(value, t)), "a number")


def _float(value: object, path: str) -> float:
    if value is None:
        return math.nan  # an undefined figure: written as null
    if isinstance(value, bool) or not isinstance(value, numbers.Real):
        raise ValueError(f"summary: {path} should be a number, not {_kind(value)}")
    return float(value)


def _int(value: object, path: str) -> int:
    if isinstance(value, bool) or not isinstance(value, numbers.Integral):
        raise ValueError(f"summary: {path} should be a whole number, not {_kind(value)}")
    return int(value)


def _str(value: object, path: str) -> str:
    if not isinstance(value, str):
        raise ValueError(f"summary: {path} should be text, not {_kind(value)}")
    return value


def _list(value: object, path: str) -> list[object]:
    if not isinstance(value, (list, tuple)):
        raise ValueError(f"summary: {path} should be a list, not {_kind(value)}")
    return list(value)


def _literal(value: object, options: tuple[_T, ...], path: str) -> _T:
    if not isinstance(value, str) or value not in options:
        raise ValueError(f"summary: {path} should be one of {', '.join(options)}, not {value!s}")
    return options[options.index(value)]


def _json(value: object, path: str) -> JsonValue:
    """A free-form JSON value, copied (numpy numbers as plain numbers, tuples as lists)."""
    if value is None or isinstance(value, (bool, str)):
        return value
    if isinstance(value, numbers.Integral):
        return int(value)
    if isinstance(value, numbers.Real):
        return float(value)
    if isinstance(value, (list, tuple)):
        return [_json(v, f"{path}[{i}]") for i, v in enumerate(value)]
    if isinstance(value, Mapping):
        return {_str(k, path): _json(v, f"{path}.{k}") for k, v in value.items()}
    raise ValueError(f"summary: {path} holds a value JSON cannot hold ({type(value).__name__})")


def _dump(value: object) -> JsonValue:
    """A summary object as plain JSON values: dataclasses as objects in field order (optional fields left
    out when None), dates as ISO text, tuples as lists, non-finite numbers as null."""
    if is_dataclass(value) and not isinstance(value, type):
        return {f.name: _dump(getattr(value, f.name)) for f in fields(value)
                if not (f.metadata.get("optional") and getattr(value, f.name) is None)}
    if isinstance(value, float):
        return value if math.isfinite(value) else None
    if value is None or isinstance(value, (bool, int, str)):
        return value
    if isinstance(value, date):
        return value.isoformat()
    if isinstance(value, Mapping):
        return {str(k): _dump(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_dump(v) for v in value]
    raise TypeError(f"summary: cannot write {type(value).__name__} as JSON")


class _Part:
    """A part of the summary: written as a JSON object by :meth:`to_json`, attribute by attribute."""

    __slots__ = ()

    def to_json(self) -> dict[str, JsonValue]:
        """This part as plain JSON values, keys in the contract's order."""
        d = _dump(self)
        assert isinstance(d, dict)
        return d


# ---- records and liabilities ----------------------------------------------------------------------------


@dataclass(frozen=True, slots=True)
class StatusCounts(_Part):
    """Records of one status: read = valued + excluded."""

    read: int
    valued: int
    excluded: int

    @classmethod
    def from_json(cls, o: _Object) -> StatusCounts:
        out = cls(read=o.whole("read"), valued=o.whole("valued"), excluded=o.whole("excluded"))
        o.done()
        return out


@dataclass(frozen=True, slots=True)
class Records(_Part):
    """The member file's reconciliation: records read = valued + excluded, by status; and the file's
    columns the valuation did not use (neither ours nor mapped in the basis)."""

    read: int
    valued: int
    excluded: int
    by_status: Mapping[Status, StatusCounts]
    ignored_columns: tuple[str, ...]

    @classmethod
    def from_json(cls, o: _Object) -> Records:
        by = o.obj("by_status")
        out = cls(read=o.whole("read"), valued=o.whole("valued"), excluded=o.whole("excluded"),
                  by_status={_literal(k, STATUSES, by.path): StatusCounts.from_json(by.obj(str(k)))
                             for k in list(by.d)},
                  ignored_columns=o.texts("ignored_columns"))
        by.done()
        o.done()
        return out


@dataclass(frozen=True, slots=True)
class Liability(_Part):
    """The liability [currency]: total, by status, by sex, and by tranche (the pensions of each tranche,
    then the lump sums under :data:`LUMP_SUMS`)."""

    total: float
    by_status: Mapping[Status, float]
    by_sex: Mapping[Sex, float]
    by_tranche: Mapping[str, float]

    @property
    def tranches(self) -> dict[str, float]:
        """The pensions of each tranche, without the lump sums [currency]."""
        return {k: v for k, v in self.by_tranche.items() if k != LUMP_SUMS}

    @property
    def lump_sums(self) -> float:
        """Cash at retirement and on death in service [currency]."""
        return float(self.by_tranche.get(LUMP_SUMS, 0.0))

    @classmethod
    def from_json(cls, o: _Object) -> Liability:
        by_status = o.obj("by_status")
        by_sex = o.obj("by_sex")
        out = cls(total=o.number("total"),
                  by_status={_literal(k, STATUSES, by_status.path): by_status.number(str(k)) for k in list(by_status.d)},
                  by_sex={_literal(k, SEXES, by_sex.path): by_sex.number(str(k)) for k in list(by_sex.d)},
                  by_tranche=o.amounts("by_tranche"))
        by_status.done()
        by_sex.done()
        o.done()
        return out


@dataclass(frozen=True, slots=True)
class ActiveMeasures(_Part):
    """The active members' measures [currency]: the projected obligation (projected unit credit, in the
    total), the accrued-benefit obligation (today's salaries) and the current service cost [currency p.a.]."""

    projected_obligation: float
    accrued_benefit_obligation: float
    current_service_cost: float

    @classmethod
    def from_json(cls, o: _Object) -> ActiveMeasures:
        out = cls(projected_obligation=o.number("projected_obligation"),
                  accrued_benefit_obligation=o.number("accrued_benefit_obligation"),
                  current_service_cost=o.number("current_service_cost"))
        o.done()
        return out


@dataclass(frozen=True, slots=True)
class Duration(_Part):
    """Durations of the expected cash flows [years]: Macaulay, modified and effective."""

    macaulay: float
    modified: float
    effective: float

    @classmethod
    def from_json(cls, o: _Object) -> Duration:
        out = cls(macaulay=o.number("macaulay"), modified=o.number("modified"), effective=o.number("effective"))
        o.done()
        return out


# ---- lists -------------------------------------------------------------------------------------------------


@dataclass(frozen=True, slots=True)
class SensitivityRow(_Part):
    """One sensitivity: the liability [currency] with one assumption shifted (``shift`` a rate [p.a.] or
    years of life expectancy) and its change [% of the base liability]."""

    name: str
    kind: SensitivityKind
    shift: float
    liability: float
    change_pct: float

    @classmethod
    def from_json(cls, o: _Object) -> SensitivityRow:
        out = cls(name=o.text("name"), kind=o.literal("kind", SENSITIVITY_KINDS), shift=o.number("shift"),
                  liability=o.number("liability"), change_pct=o.number("change_pct"))
        o.done()
        return out


@dataclass(frozen=True, slots=True)
class LifeExpectancyRow(_Part):
    """Complete expectation of life [years] from ``at_age`` for a member aged ``age_now`` today."""

    sex: Sex
    age_now: int
    at_age: int
    basis: ExpectancyBasis
    years: float

    @classmethod
    def from_json(cls, o: _Object) -> LifeExpectancyRow:
        out = cls(sex=o.literal("sex", SEXES), age_now=o.whole("age_now"), at_age=o.whole("at_age"),
                  basis=o.literal("basis", EXPECTANCY_BASES), years=o.number("years"))
        o.done()
        return out


@dataclass(frozen=True, slots=True)
class DeathsRow(_Part):
    """Deaths expected in the year after the valuation date in one status x sex cell: lives, and the
    pension ceasing [currency p.a.]."""

    status: Status
    sex: Sex
    lives: float
    amounts: float

    @classmethod
    def from_json(cls, o: _Object) -> DeathsRow:
        out = cls(status=o.literal("status", STATUSES), sex=o.literal("sex", SEXES), lives=o.number("lives"),
                  amounts=o.number("amounts"))
        o.done()
        return out


@dataclass(frozen=True, slots=True)
class ExpectedDeaths(_Part):
    """Deaths expected in the year after the valuation date: totals and one row a status x sex."""

    lives: float
    amounts: float
    by_group: tuple[DeathsRow, ...]

    @classmethod
    def from_json(cls, o: _Object) -> ExpectedDeaths:
        out = cls(lives=o.number("lives"), amounts=o.number("amounts"),
                  by_group=tuple(DeathsRow.from_json(r) for r in o.rows("by_group")))
        o.done()
        return out


# ---- assumptions and manifest ----------------------------------------------------------------------------


@dataclass(frozen=True, slots=True)
class Assumptions(_Part):
    """The key assumptions as the reports put them in words. A rate basis given as a single rate is
    ``<name>_rate_flat``; a yield curve is shown by its 10-year spot rate, ``<name>_curve_10y`` (the other
    of each pair is None and left out of the JSON)."""

    discount_rate_flat: float | None = field(metadata=_OPTIONAL)
    discount_curve_10y: float | None = field(metadata=_OPTIONAL)
    inflation_rate_flat: float | None = field(metadata=_OPTIONAL)
    inflation_curve_10y: float | None = field(metadata=_OPTIONAL)
    salary_growth: float
    retirement_age: float
    payment_frequency: int
    payment_timing: str
    proportion_married: Mapping[Sex, float]
    spouse_age_difference: float
    spouse_fraction: float
    commutation_proportion: float
    fractional_age: str
    age_convention: str

    def rate(self, name: Literal["discount", "inflation"]) -> tuple[float, bool] | None:
        """The discount or inflation rate [p.a.] and whether it is a single flat rate (else the 10-year spot
        rate of a curve); None when neither is given."""
        flat = self.discount_rate_flat if name == "discount" else self.inflation_rate_flat
        curve = self.discount_curve_10y if name == "discount" else self.inflation_curve_10y
        if flat is not None:
            return flat, True
        return (curve, False) if curve is not None else None

    @classmethod
    def from_json(cls, o: _Object) -> Assumptions:
        married = o.obj("proportion_married")

        def optional(key: str) -> float | None:
            return o.number(key) if o.has(key) else None

        out = cls(
            discount_rate_flat=optional("discount_rate_flat"), discount_curve_10y=optional("discount_curve_10y"),
            inflation_rate_flat=optional("inflation_rate_flat"),
            inflation_curve_10y=optional("inflation_curve_10y"),
            salary_growth=o.number("salary_growth"), retirement_age=o.number("retirement_age"),
            payment_frequency=o.whole("payment_frequency"), payment_timing=o.text("payment_timing"),
            proportion_married={_literal(k, SEXES, married.path): married.number(str(k)) for k in list(married.d)},
            spouse_age_difference=o.number("spouse_age_difference"), spouse_fraction=o.number("spouse_fraction"),
            commutation_proportion=o.number("commutation_proportion"), fractional_age=o.text("fractional_age"),
            age_convention=o.text("age_convention"),
        )
        married.done()
        o.done()
        return out


@dataclass(frozen=True, slots=True)
class Manifest(_Part):
    """What is needed to repeat the run: the tool's version, the SHA-256 of every input by its path, the
    basis as loaded, the settings, the member file's unused columns, the start time (ISO 8601, UTC) and the
    run time [seconds].

    ``basis`` and ``settings`` are free-form JSON objects: the basis is the basis model's own dump (its
    keys are the basis file's, documented with it), and the settings are whatever the caller of the
    engine ran with (a run: ``sensitivities``, ``q_multiplier``, ``chunk_size``, and ``streaming`` for a
    streamed run)."""

    tool_version: str
    inputs: Mapping[str, str]
    basis: Mapping[str, JsonValue]
    settings: Mapping[str, JsonValue]
    ignored_columns: tuple[str, ...]
    started_at: str
    run_seconds: float

    def section(self, *keys: str) -> Mapping[str, JsonValue]:
        """A table of the basis as loaded, by its keys (``section("payment")``); empty where it has none."""
        node: JsonValue = dict(self.basis)
        for key in keys:
            node = node.get(key) if isinstance(node, dict) else None
        return node if isinstance(node, dict) else {}

    @property
    def currency(self) -> str | None:
        """The basis's ISO 4217 currency code, or None when it names none."""
        code = self.basis.get("currency")
        return code if isinstance(code, str) and code else None

    @classmethod
    def from_json(cls, o: _Object) -> Manifest:
        inputs = o.obj("inputs")
        out = cls(tool_version=o.text("tool_version"),
                  inputs={_str(k, inputs.path): inputs.text(str(k)) for k in list(inputs.d)},
                  basis=o.table("basis"), settings=o.table("settings"),
                  ignored_columns=o.texts("ignored_columns"), started_at=o.text("started_at"),
                  run_seconds=o.number("run_seconds"))
        inputs.done()
        o.done()
        return out


# ---- the summary ---------------------------------------------------------------------------------------------


@dataclass(frozen=True, slots=True)
class RunSummary(_Part):
    """The headline results of one run: exactly ``summary.json`` (:meth:`to_json`).

    Attributes
    ----------
    valuation_date
        The basis's valuation date (ISO text in the JSON).
    basis_name
        The basis's ``name``.
    records
        The member file's reconciliation (:class:`Records`).
    liability
        Total, by status, sex and tranche [currency] (:class:`Liability`).
    active_measures
        The active members' obligation, accrued-benefit obligation and service cost (:class:`ActiveMeasures`).
    duration
        Macaulay, modified and effective durations [years] (:class:`Duration`).
    single_equivalent_discount_rate
        The flat rate [p.a.] giving the same present value of the cash flows; NaN (null) without payments.
    cashflow_present_value
        The present value of the expected cash flows [currency] (equal to the total liability).
    sensitivities
        One :class:`SensitivityRow` a sensitivity of the basis.
    life_expectancy
        :class:`LifeExpectancyRow` by sex: cohort at 65 for 65 and 45 now, and period at 65.
    expected_deaths_next_year
        Lives and pensions [currency p.a.] expected to cease next year (:class:`ExpectedDeaths`).
    assumptions
        The key assumptions, ready for words (:class:`Assumptions`).
    manifest
        Version, inputs, basis as loaded, settings, timing (:class:`Manifest`; also ``manifest.json``).
    """

    valuation_date: date
    basis_name: str
    records: Records
    liability: Liability
    active_measures: ActiveMeasures
    duration: Duration
    single_equivalent_discount_rate: float
    cashflow_present_value: float
    sensitivities: tuple[SensitivityRow, ...]
    life_expectancy: tuple[LifeExpectancyRow, ...]
    expected_deaths_next_year: ExpectedDeaths
    assumptions: Assumptions
    manifest: Manifest

    @property
    def currency(self) -> str | None:
        """The ISO 4217 code of every amount (the basis's ``currency``), or None when the basis names none.
        Not a key of ``summary.json`` of its own: it is the manifest's ``basis.currency``."""
        return self.manifest.currency

    @classmethod
    def from_json(cls, d: Mapping[str, object]) -> RunSummary:
        """Read a summary: the engine's dictionary or ``summary.json`` as loaded.

        Raises
        ------
        ValueError
            A key missing or unknown, or a value of the wrong kind; the message names the key's path
            (``liability.by_status.retired``).
        """
        o = _Object(d, "")
        when = o.get("valuation_date")
        if isinstance(when, date):
            valuation_date = when
        else:
            try:
                valuation_date = date.fromisoformat(_str(when, "valuation_date"))
            except ValueError as exc:
                raise ValueError(f"summary: valuation_date should be an ISO date (YYYY-MM-DD), not {when!s}") from exc
        out = cls(
            valuation_date=valuation_date,
            basis_name=o.text("basis_name"),
            records=Records.from_json(o.obj("records")),
            liability=Liability.from_json(o.obj("liability")),
            active_measures=ActiveMeasures.from_json(o.obj("active_measures")),
            duration=Duration.from_json(o.obj("duration")),
            single_equivalent_discount_rate=o.number("single_equivalent_discount_rate"),
            cashflow_present_value=o.number("cashflow_present_value"),
            sensitivities=tuple(SensitivityRow.from_json(r) for r in o.rows("sensitivities")),
            life_expectancy=tuple(LifeExpectancyRow.from_json(r) for r in o.rows("life_expectancy")),
            expected_deaths_next_year=ExpectedDeaths.from_json(o.obj("expected_deaths_next_year")),
            assumptions=Assumptions.from_json(o.obj("assumptions")),
            manifest=Manifest.from_json(o.obj("manifest")),
        )
        o.done()
        return out

    def to_json(self) -> dict[str, JsonValue]:
        """The summary as ``summary.json`` holds it: plain JSON values, keys in the contract's order."""
        return _Part.to_json(self)
