"""The compiled leg kernel against the readable array version (the same cases through every path:
STYLE.md habit 4). Both implement [DHW] eq. (5.12) and section 9.5; they must agree to rounding."""

from __future__ import annotations

import numpy as np
import pytest

from tests.engine_helpers import sult_toml, write_basis
from valuation.engine.context import Context, MortalityRows
from valuation.engine.legs import Exits, value_leg, value_leg_numpy
from valuation.engine.project import Valuer


@pytest.mark.parametrize("fractional", ["udd", "constant_force"])
@pytest.mark.parametrize("frequency,timing", [(12, "advance"), (1, "arrears"), (4, "advance")])
@pytest.mark.parametrize("kind", ["own", "reversion"])
def test_kernel_equals_array_version(tmp_path, fractional, frequency, timing, kind):
    text = sult_toml(frequency=frequency, timing=timing, improvement='{ kind = "constant", rate = 0.01 }',
                     increase='kind = "fixed", rate = 0.02', revaluation='kind = "fixed", rate = 0.03')
    text = text.replace('timing = "', 'timing = "').replace("[payment]", "[conventions]\nfractional_age = "
                                                             f'"{fractional}"\n[payment]')
    basis = write_basis(tmp_path, text)
    valuer = Valuer(basis)
    ctx: Context = valuer.ctx
    mrows: MortalityRows = valuer.mrows
    rng = np.random.default_rng(5)
    K = 40
    x0 = rng.uniform(20, 100, K)
    y0 = np.clip(x0 + rng.normal(0, 5, K), 18, 110)
    rows_x = mrows.rows(np.zeros(K, dtype=np.int64), 2025 - np.floor(x0).astype(np.int64))
    rows_y = mrows.rows(np.ones(K, dtype=np.int64), 2025 - np.floor(y0).astype(np.int64))
    start = np.where(rng.random(K) < 0.5, 0, rng.integers(0, 300, K)).astype(np.int64)
    guar = np.where(rng.random(K) < 0.3, rng.integers(1, 60, K), 0).astype(np.int64)
    stop = np.where(rng.random(K) < 0.2, rng.integers(10, 200, K), ctx.months).astype(np.int64)
    weights = rng.uniform(0, 1000, (K, 1))
    at_start = rng.uniform(0.5, 2.0, (K, 1))
    args = dict(kind=kind, rows_x=rows_x, x0=x0, start=start, weights=weights, at_start=at_start,
                increase=valuer.increase, guarantee=guar)
    if kind == "own":
        args["stop"] = np.maximum(stop, start + 1)
    else:
        args.update(rows_y=rows_y, y0=y0, growth=valuer.revalue)
    fast = value_leg(ctx, mrows, **args)
    slow = value_leg_numpy(ctx, mrows, **args)
    np.testing.assert_allclose(fast.unit_pv, slow.unit_pv, rtol=1e-11, atol=1e-12)
    np.testing.assert_allclose(fast.cashflow, slow.cashflow, rtol=1e-10, atol=1e-9)


@pytest.mark.parametrize("rule", ["proportionate", "none_until_full_year"])
@pytest.mark.parametrize("frequency,timing", [(12, "advance"), (2, "arrears")])
@pytest.mark.parametrize("kind", ["own", "reversion"])
def test_kernel_equals_array_version_with_first_increase_and_exits(tmp_path, rule, frequency, timing, kind):
    """The same agreement with an increase date, a first-increase rule, two tranches, and for reversions
    the withdrawal mixture and the prospective attribution of a spouse's pension on a death before the
    start."""
    text = sult_toml(frequency=frequency, timing=timing, increase='kind = "inflation", floor = 0.0, cap = 0.05',
                     revaluation='kind = "fixed", rate = 0.03', inflation=0.025)
    text = text.replace("[payment]", f'[payment]\nincrease_date = "04-06"\nfirst_increase = "{rule}"')
    text = text.replace("[tranches.main]", '[benefits]\ndefault_tranche = "main"\n[tranches.late]\n'
                        'increase = { kind = "fixed", rate = 0.01 }\n[tranches.main]')
    basis = write_basis(tmp_path, text)
    valuer = Valuer(basis)
    ctx: Context = valuer.ctx
    mrows: MortalityRows = valuer.mrows
    assert valuer.first_increase is not None and ctx.increase_month == 4
    rng = np.random.default_rng(11)
    K, J = 30, 2
    x0 = rng.uniform(20, 70, K)
    y0 = np.clip(x0 + rng.normal(0, 5, K), 18, 110)
    rows_x = mrows.rows(np.zeros(K, dtype=np.int64), 2025 - np.floor(x0).astype(np.int64))
    rows_y = mrows.rows(np.ones(K, dtype=np.int64), 2025 - np.floor(y0).astype(np.int64))
    start = np.where(rng.random(K) < 0.2, rng.integers(0, 3, K), rng.integers(3, 400, K)).astype(np.int64)
    weights = rng.uniform(0, 1000, (K, J))
    at_start = rng.uniform(0.5, 2.0, (K, J))
    args = dict(kind=kind, rows_x=rows_x, x0=x0, start=start, weights=weights, at_start=at_start,
                increase=valuer.increase, first_increase=valuer.first_increase)
    if kind == "reversion":
        S = 36
        stay = np.cumprod(1.0 - rng.uniform(0, 0.1, (K, S - 1)), axis=1)
        exits = Exits(np.column_stack([np.ones(K), stay]),
                      np.column_stack([np.zeros(K), np.cumsum(rng.uniform(0, 0.05, (K, S - 1)), axis=1)]),
                      valuer.revalue)
        args.update(rows_y=rows_y, y0=y0, growth=valuer.ctx.salary_index()[None, :].repeat(J, axis=0),
                    exits=exits, service=rng.uniform(0.5, 30, K))
    fast = value_leg(ctx, mrows, **args)
    slow = value_leg_numpy(ctx, mrows, **args)
    np.testing.assert_allclose(fast.unit_pv, slow.unit_pv, rtol=1e-11, atol=1e-12)
    np.testing.assert_allclose(fast.cashflow, slow.cashflow, rtol=1e-10, atol=1e-9)


def _shared_class_keys(rng, mrows, K, ages, months_of_age, *, sex_row=0):
    """K keys on a few whole ages and months of age, each with its own fraction of a month: many keys to a
    class, so that the class walk (UDD) values them together."""
    a = rng.choice(ages, K)
    k = rng.choice(months_of_age, K)
    x0 = a + k / 12.0 + rng.uniform(0.0, 1.0 / 12.0, K)
    rows = mrows.rows(np.full(K, sex_row, dtype=np.int64), 2025 - np.floor(x0).astype(np.int64))
    return x0, rows


@pytest.mark.parametrize("frequency,timing", [(12, "advance"), (4, "arrears"), (1, "advance")])
@pytest.mark.parametrize("case", ["own", "own_later", "reversion", "reversion_before_start", "with_exits"])
def test_class_walk_equals_array_version(tmp_path, frequency, timing, case):
    """Keys that share survival row, whole age, month of age and dates are valued by one walk (UDD: l linear
    in age between integer ages, [DHW] section 3.3); every key's value and the cash flows must equal the
    readable array version's, one key at a time, to rounding."""
    from valuation.engine.legs import key_classes, payment_window

    text = sult_toml(frequency=frequency, timing=timing, increase='kind = "inflation", floor = 0.0, cap = 0.05',
                     revaluation='kind = "fixed", rate = 0.03', inflation=0.025,
                     improvement='{ kind = "constant", rate = 0.01 }')
    text = text.replace("[payment]", '[payment]\nincrease_date = "04-06"\nfirst_increase = "proportionate"')
    text = text.replace("[tranches.main]", '[benefits]\ndefault_tranche = "main"\n[tranches.late]\n'
                        'increase = { kind = "fixed", rate = 0.01 }\n[tranches.main]')
    basis = write_basis(tmp_path, text)
    valuer = Valuer(basis)
    ctx, mrows = valuer.ctx, valuer.mrows
    rng = np.random.default_rng(23)
    K, J = 120, 2
    later = case != "own" and case != "reversion"
    x0, rows_x = _shared_class_keys(rng, mrows, K, [48, 63, 72] if later else [66, 81, 97], [0, 5, 11])
    y0 = x0 - 3.0  # an assumed spouse three years younger: the spouse's month of age follows the member's
    rows_y = mrows.rows(np.ones(K, dtype=np.int64), 2025 - np.floor(y0).astype(np.int64))
    # retirement at 65 on the monthly grid, as the rules set it: the same start for a class
    start = (np.rint((65.0 - np.floor(x0 * 12) / 12) * 12).astype(np.int64) if later
             else np.zeros(K, dtype=np.int64))
    start = np.maximum(start, 0)
    guar = np.where(np.floor(x0) == 81, 36, 0).astype(np.int64) if case in ("own", "reversion") else None
    weights = rng.uniform(0, 1000, (K, J))
    at_start = rng.uniform(0.5, 2.0, (K, J))
    args: dict = dict(kind="own" if case.startswith("own") else "reversion", rows_x=rows_x, x0=x0, start=start,
                      weights=weights, at_start=at_start, increase=valuer.increase,
                      first_increase=valuer.first_increase if later else None, guarantee=guar)
    if args["kind"] == "reversion":
        args.update(rows_y=rows_y, y0=y0)
    if case in ("reversion_before_start", "with_exits"):
        args["growth"] = valuer.revalue
    if case == "with_exits":
        S = 30
        group = np.unique(np.column_stack([np.floor(x0), np.floor((x0 % 1) * 12)]), axis=0, return_inverse=True)[1]
        w = rng.uniform(0, 0.1, (group.max() + 1, S - 1))[group.ravel()]  # one withdrawal row a class
        stay = np.cumprod(1.0 - w, axis=1)
        exits = Exits(np.column_stack([np.ones(K), stay]), np.column_stack([np.zeros(K), np.cumsum(w, axis=1)]),
                      valuer.revalue)
        args.update(growth=valuer.ctx.salary_index()[None, :].repeat(J, axis=0), exits=exits)
    first, end = payment_window(ctx, args["kind"], x0, start, None, args.get("y0"))
    classes = key_classes(ctx, args["kind"], rows_x, x0, first, end, start,
                          np.zeros(K, dtype=np.int64) if guar is None else guar, rows_y=args.get("rows_y"),
                          y0=args.get("y0"), exits=args.get("exits"))
    assert classes is not None and len(classes[1]) - 1 < K / 4, "the keys should share classes"
    fast = value_leg(ctx, mrows, **args)
    slow = value_leg_numpy(ctx, mrows, **args)
    np.testing.assert_allclose(fast.unit_pv, slow.unit_pv, rtol=1e-11, atol=1e-12)
    np.testing.assert_allclose(fast.cashflow, slow.cashflow, rtol=1e-10, atol=1e-9)
