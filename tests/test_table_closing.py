"""A downloaded table that stops short of q = 1, used through a basis with ``closing = "at_last_age"``.

Closing a table at its last age (q = 1 there) is common practice for tables published to a last age
below the limiting age; the liability effect is checked against the survival identity
l_{x+1} = l_x (1 - q_x) (Dickson, Hardy & Waters, Actuarial Mathematics for Life Contingent Risks, 2nd
ed., ch. 3): with q = 1 at the last age, no one survives past it.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from valuation.basis import load_basis
from valuation.errors import ValuationError

BASIS = """
name = "closing test"
valuation_date = 2025-03-31
[discount]
rate = 0.04
[inflation]
rate = 0.02
[mortality.default.M]
table = "short.csv"
{closing}
[mortality.default.F]
table = "SULT"
"""


def _write(tmp_path: Path, closing: str) -> Path:
    ages = np.arange(20, 101)
    q = np.minimum(0.0005 * np.exp(0.09 * (ages - 20)), 0.9)  # stops at age 100 with q < 1
    (tmp_path / "short.csv").write_text("age,q\n" + "".join(f"{a},{v:.8f}\n" for a, v in zip(ages, q, strict=True)))
    path = tmp_path / "basis.toml"
    path.write_text(BASIS.format(closing=closing))
    return path


def test_unclosed_table_is_refused_with_the_basis_key_in_the_fix(tmp_path):
    with pytest.raises(ValuationError) as info:
        load_basis(_write(tmp_path, "")).mortality("pensioner", "M")
    assert "no closing age" in str(info.value) and 'closing = "at_last_age"' in str(info.value)


def test_closing_at_last_age(tmp_path):
    basis = load_basis(_write(tmp_path, 'closing = "at_last_age"'))
    mb = basis.mortality("pensioner", "M")
    q = mb.q(np.array([99.0, 100.0]), 2025)
    assert q[1] == 1.0  # closed at the last age
    assert q[0] == pytest.approx(min(0.0005 * np.exp(0.09 * 79), 0.9), rel=1e-7)  # printed to 8 decimals
