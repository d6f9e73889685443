"""Property tests (hypothesis, modest example counts) for survival, annuities and discounting.

Each property is a published qualitative fact: survival is non-increasing in time (tp_x = l_{x+t}/l_x
with l non-increasing, DHW section 2.2); annuity values fall as the discount rate or mortality rises
(DHW chapter 5, each term v^t tp_x falls); joint-life survival is at most either single-life survival
(DHW chapter 9, tp_xy = tp_x tp_y with tp_y <= 1); the single equivalent discount rate reproduces the
curve's present value (IAS 19 para 83) and, for positive cash flows, lies between the smallest and
largest spot rates used (PV is decreasing in each rate).
"""

from __future__ import annotations

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from tests.oracles import annuity_factor, joint_life, tpx
from valuation.discounting import (
    RateCurve,
    macaulay_duration,
    present_value,
    single_equivalent_rate,
)
from valuation.mortality.laws import Makeham

SETTINGS = settings(max_examples=25, deadline=None)

laws = st.builds(
    Makeham,
    A=st.floats(0.0, 0.002),
    B=st.floats(1e-6, 1e-4),
    c=st.floats(1.06, 1.13),
)


def q_row(law: Makeham, scale: float = 1.0) -> np.ndarray:
    q = np.minimum(1.0, scale * law.qx(np.arange(0, 121)))
    q[120] = 1.0
    return q[None, :]


@SETTINGS
@given(laws, st.floats(0.0, 110.0), st.sampled_from(["udd", "constant_force"]))
def test_survival_non_increasing_in_time(law: Makeham, x0: float, fractional: str) -> None:
    t = np.linspace(0.0, 60.0, 721)
    tp = tpx(q_row(law), [0], [x0], t, fractional)[0]  # type: ignore[arg-type]
    assert tp[0] == 1.0 or tp[0] == 0.0
    assert np.all(np.diff(tp) <= 1e-15)
    assert np.all((tp >= 0.0) & (tp <= 1.0))


@SETTINGS
@given(laws, st.floats(20.0, 100.0), st.floats(0.0, 0.08), st.floats(0.001, 0.03), st.sampled_from([1, 12]))
def test_annuity_falls_as_rate_rises(law: Makeham, x0: float, i: float, bump: float, m: int) -> None:
    q = q_row(law)
    low = annuity_factor(q, [0], [x0], RateCurve.flat(i), frequency=m)[0]
    high = annuity_factor(q, [0], [x0], RateCurve.flat(i + bump), frequency=m)[0]
    assert high < low


@SETTINGS
@given(laws, st.floats(20.0, 100.0), st.floats(1.01, 2.0), st.floats(0.0, 0.06))
def test_annuity_falls_as_mortality_rises(law: Makeham, x0: float, scale: float, i: float) -> None:
    curve = RateCurve.flat(i)
    base = annuity_factor(q_row(law), [0], [x0], curve, frequency=12)[0]
    heavier = annuity_factor(q_row(law, scale), [0], [x0], curve, frequency=12)[0]
    assert heavier <= base + 1e-12
    assert heavier < base or base <= 1.0 / 12 + 1e-12  # only the first, certain, payment left


@SETTINGS
@given(laws, laws, st.floats(20.0, 100.0), st.floats(20.0, 100.0))
def test_joint_survival_at_most_each_single(law_x: Makeham, law_y: Makeham, x0: float, y0: float) -> None:
    t = np.linspace(0.0, 80.0, 161)
    tp_x = tpx(q_row(law_x), [0], [x0], t)[0]
    tp_y = tpx(q_row(law_y), [0], [y0], t)[0]
    joint = joint_life(tp_x, tp_y)
    assert np.all(joint <= np.minimum(tp_x, tp_y) + 1e-15)


curves = st.lists(st.floats(-0.005, 0.08), min_size=1, max_size=6).map(
    lambda rates: RateCurve.from_spot(np.cumsum(np.full(len(rates), 5.0)), rates)
)


@SETTINGS
@given(curves, st.lists(st.floats(0.0, 1e6), min_size=1, max_size=60).filter(lambda c: sum(c) > 1.0))
def test_sedr_reproduces_pv_and_lies_between_spot_rates(curve: RateCurve, cf: list[float]) -> None:
    c = np.asarray(cf)
    t = np.arange(1.0, c.size + 1)
    sedr = single_equivalent_rate(c, t, curve)
    pv_curve = present_value(c, t, curve)
    flat = RateCurve.flat(sedr)
    assert abs(present_value(c, t, flat) - pv_curve) <= 1e-9 * pv_curve
    used = curve.spot(t[c > 0])
    assert used.min() - 1e-10 <= sedr <= used.max() + 1e-10
    # Macaulay duration at the SEDR is a PV-weighted mean time, so it lies within the payment times
    dur = macaulay_duration(c, t, flat)
    assert t[c > 0].min() - 1e-9 <= dur <= t[c > 0].max() + 1e-9
