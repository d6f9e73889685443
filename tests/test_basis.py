"""The assumptions basis: loading, defaults, paths relative to the TOML file, readable error messages.

Sources: the TOML layout and allowed values are the package's own (valuation/basis/model.py); the SULT
survival check uses [DHW] Dickson, Hardy & Waters, *Actuarial Mathematics for Life Contingent Risks*,
Appendix D (Standard Ultimate Life Table: l_60 = 96,634.1, l_65 = 94,579.7).
"""

from __future__ import annotations

import json
from datetime import date
from pathlib import Path

import numpy as np
import pytest

from valuation.basis import load_basis
from valuation.errors import BasisError

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "assumptions" / "demo_basis.toml"
SULT = ROOT / "assumptions" / "sult_basis.toml"

MINIMAL = """
name = "t"
valuation_date = 2025-03-31
[discount]
rate = 0.05
[inflation]
rate = 0.02
[mortality.default.M]
table = "SULT"
[mortality.default.F]
table = "SULT"
"""


def write(tmp_path: Path, text: str, name: str = "basis.toml") -> Path:
    p = tmp_path / name
    p.parent.mkdir(parents=True, exist_ok=True)
    p.write_text(text, encoding="utf-8")
    return p


def error_of(tmp_path: Path, text: str) -> str:
    with pytest.raises(BasisError) as info:
        load_basis(write(tmp_path, text))
    return str(info.value)


def test_demo_basis_uses_every_feature() -> None:
    b = load_basis(DEMO)
    assert b.valuation_date == date(2025, 3, 31)
    assert set(b.tranches) == {"pre2005", "post2005"} and b.default_tranche == "post2005"
    pre = b.tranches["pre2005"]
    assert (pre.increase.kind, pre.increase.floor, pre.increase.cap) == ("inflation", 0.0, 0.05)
    assert (pre.revaluation.kind, pre.revaluation.cap) == ("inflation", 0.05)
    assert b.accrual_rate == 1 / 60  # "1/60" in the file
    assert b.payment.frequency == 12 and b.payment.timing == "advance"
    assert b.withdrawal is not None and b.withdrawal[0] == (18.0, 0.10)
    assert b.commutation.proportion == 0.2 and b.commutation.factor == 18.0
    assert {s.kind for s in b.sensitivities} == {
        "discount_rate", "inflation", "salary_growth", "life_expectancy", "long_term_improvement"}
    assert b.mapping.status_codes["X"] == "dependant" and b.mapping.sex_codes["1"] == "M"
    assert b.spouse.proportion_married == {"M": 0.8, "F": 0.7} and b.spouse.fraction == 0.5
    assert float(b.discount_curve().spot(10.0)) == pytest.approx(0.048, abs=1e-12)
    assert float(b.inflation_curve().spot(10.0)) == pytest.approx(0.030, abs=1e-12)
    json.dumps(b.as_dict())  # JSON-serialisable manifest
    assert b.as_dict()["mortality"]["pensioner"]["M"]["age_rating"] == 1


def test_mortality_fallback_rule() -> None:
    """Stated rule: own entry, else (spouse) the dependant entry, else default; shared entries are cached."""
    b = load_basis(DEMO)
    assert b.mortality_key("spouse", "F") == "mortality.dependant.F"
    assert b.mortality_key("spouse", "M") == "mortality.default.M"
    assert b.mortality_key("pensioner", "F") == "mortality.default.F"
    assert b.mortality("spouse", "F") is b.mortality("dependant", "F")
    assert b.mortality("active", "M") is b.mortality("deferred", "M")
    assert b.mortality("pensioner", "M").age_rating == 1 and b.mortality("pensioner", "M").percentage == 1.05
    # closing age: bundled demo tables close at 120 (q_120 = 1); a +1 rating reaches it a year earlier
    assert b.closing_age("pensioner", "M") == 119 and b.closing_age("active", "F") == 120


def test_sult_basis_reproduces_published_survival() -> None:
    """[DHW] Appendix D: 5p_60 = l_65 / l_60 = 94,579.7 / 96,634.1 (printed to 0.1 of a life)."""
    b = load_basis(SULT)
    q = b.mortality("pensioner", "M").q(np.arange(60, 65), np.full(5, 2030))
    expected = 94_579.7 / 96_634.1
    assert float(np.prod(1 - q)) == pytest.approx(expected, abs=0.1 / 96_634.1 * 2)
    assert b.tranches["main"].increase.kind == "none" and b.payment.frequency == 1
    assert float(b.discount_curve().spot(7.0)) == pytest.approx(0.05, abs=1e-12)


def test_defaults_for_optional_sections(tmp_path: Path) -> None:
    b = load_basis(write(tmp_path, MINIMAL))
    assert list(b.tranches) == ["main"] and b.default_tranche == "main"
    assert b.retirement_age == 65.0 and b.withdrawal is None and b.sensitivities == []
    assert b.payment.frequency == 12 and b.fractional_age == "udd" and b.age_convention == "exact"
    assert b.spouse.fraction == 0.0 and b.thresholds.old_age == 100.0


def test_curve_file_is_relative_to_the_toml_file(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    curve = tmp_path / "cfg" / "curves" / "spot.csv"
    curve.parent.mkdir(parents=True)
    curve.write_text("term,rate\n1,0.03\n10,0.04\n20,0.045\n", encoding="utf-8")
    text = MINIMAL.replace('[discount]\nrate = 0.05', '[discount]\ncurve = "curves/spot.csv"')
    path = write(tmp_path, text, "cfg/basis.toml")
    monkeypatch.chdir(tmp_path)  # a different working directory must not matter
    b = load_basis(path)
    assert float(b.discount_curve().spot(10.0)) == pytest.approx(0.04, abs=1e-12)
    # linear interpolation in the spot rate between given terms (discounting module's stated rule)
    assert float(b.discount_curve().spot(15.0)) == pytest.approx(0.0425, abs=1e-12)


def test_demo_curve_file_loads(tmp_path: Path) -> None:
    """The shipped curve file (assumptions/discount_curve.csv) gives 4.90 % at 20 years."""
    text = DEMO.read_text(encoding="utf-8").replace("rate = 0.048", 'curve = "discount_curve.csv"', 1)
    (tmp_path / "discount_curve.csv").write_bytes((DEMO.parent / "discount_curve.csv").read_bytes())
    b = load_basis(write(tmp_path, text))
    assert float(b.discount_curve().spot(20.0)) == pytest.approx(0.049, abs=1e-12)


@pytest.mark.parametrize(
    ("change", "expected"),
    [
        (("[payment]\nfrequency = 3", ""), ["payment.frequency", "1, 2, 4 or 12", "got 3"]),
        (("[payment]\nfrequncy = 12", ""), ["unknown key 'payment.frequncy'", "allowed keys here: frequency, timing"]),
        (("[benefits]\ndesign = \"average\"", ""), ["benefits.design", "'final_salary' or 'career_average'"]),
        (("[tranches.main]\nincrease = { kind = \"rpi\" }", ""), ["tranches.main.increase.kind", "'none', 'fixed' or 'inflation'"]),
        (("[conventions]\nage_convention = \"nearest\"", ""), ["conventions.age_convention", "'last_birthday'"]),
        (("[mapping.status_codes]\nR = \"retired\"", ""), ["mapping.status_codes", "pensioner, dependant, deferred, active", "retired"]),
        (("[benefits]\naccrual_rate = \"1/0\"", ""), ["benefits.accrual_rate", "1/60"]),
        (("[spouse]\nproportion_married = { M = 0.8 }", ""), ["spouse.proportion_married", "missing: F"]),
        (("[[sensitivities]]\nname = \"x\"\nkind = \"longevity\"\nshift = 1", ""), ["sensitivities[0].kind", "'life_expectancy'"]),
        (("[mapping.columns]\nRef = \"member_number\"", ""), ["member_number", "allowed:", "member_id"]),
        (("[withdrawal]\nrates = [[30, 0.1], [20, 0.1]]", ""), ["withdrawal.rates", "must increase"]),
    ],
)
def test_messages_name_the_key_and_allowed_values(tmp_path: Path, change: tuple[str, str], expected: list[str]) -> None:
    msg = error_of(tmp_path, MINIMAL + "\n" + change[0] + "\n")
    assert "basis.toml" in msg
    for part in expected:
        assert part in msg, msg


def test_improvement_messages(tmp_path: Path) -> None:
    bad_kind = MINIMAL.replace('[mortality.default.F]\ntable = "SULT"',
                               '[mortality.default.F]\ntable = "DEMO_F"\nimprovement = { kind = "cubic" }')
    msg = error_of(tmp_path, bad_kind)
    assert "mortality.default.F.improvement" in msg and "'convergence'" in msg and "'by_age'" in msg
    bad_param = MINIMAL.replace(
        '[mortality.default.F]\ntable = "SULT"',
        '[mortality.default.F]\ntable = "DEMO_F"\nimprovement = { kind = "convergence", initial_ages = [60, 80], '
        'initial_rates = [0.02], long_term_rate = 0.015, start_year = 2021, convergence_years = 10 }')
    msg = error_of(tmp_path, bad_param)
    assert "mortality.default.F.improvement" in msg and "initial_rates" in msg
    typo = MINIMAL.replace('[mortality.default.F]\ntable = "SULT"',
                           '[mortality.default.F]\ntable = "DEMO_F"\nimprovement = { kind = "constant", rat = 0.01 }')
    msg = error_of(tmp_path, typo)
    assert "unknown key 'mortality.default.F.improvement.rat'" in msg and "rate" in msg


def test_cross_section_messages(tmp_path: Path) -> None:
    two = MINIMAL + "[tranches.a]\n[tranches.b]\n"
    assert "benefits.default_tranche is required" in error_of(tmp_path, two)
    assert "allowed: a, b" in error_of(tmp_path, two + "[benefits]\ndefault_tranche = \"c\"\n")
    no_f = MINIMAL.replace('[mortality.default.F]\ntable = "SULT"', "")
    assert "[mortality.default.F]" in error_of(tmp_path, no_f)
    both = MINIMAL.replace("[discount]\nrate = 0.05", '[discount]\nrate = 0.05\ncurve = "x.csv"')
    assert "exactly one of 'rate'" in error_of(tmp_path, both)
    assert "key 'valuation_date' is required" in error_of(tmp_path, MINIMAL.replace("valuation_date = 2025-03-31", ""))
    assert "tranche name 'Pre'" in error_of(tmp_path, MINIMAL + "[tranches.Pre]\n")


def test_file_level_errors(tmp_path: Path) -> None:
    with pytest.raises(BasisError, match="basis file not found"):
        load_basis(tmp_path / "nope.toml")
    assert "not valid TOML" in error_of(tmp_path, "name = \n")
    missing_curve = MINIMAL.replace("[discount]\nrate = 0.05", '[discount]\ncurve = "nowhere.csv"')
    assert "discount.curve" in error_of(tmp_path, missing_curve)
    missing_table = MINIMAL.replace('table = "SULT"', 'table = "tables/none.csv"', 1)
    msg = error_of(tmp_path, missing_table)
    assert "mortality.default.M" in msg and "none.csv" in msg


def test_curve_file_content_errors(tmp_path: Path) -> None:
    (tmp_path / "c.csv").write_text("term,rate\n1,0.03\n5,abc\n", encoding="utf-8")
    msg = error_of(tmp_path, MINIMAL.replace("[discount]\nrate = 0.05", '[discount]\ncurve = "c.csv"'))
    assert "row 3" in msg and "column 'rate'" in msg and "'abc' is not a number" in msg
    (tmp_path / "d.csv").write_text("term,rate\n5,0.03\n2,0.04\n", encoding="utf-8")
    msg = error_of(tmp_path, MINIMAL.replace("[discount]\nrate = 0.05", '[discount]\ncurve = "d.csv"'))
    assert "row 3" in msg and "column 'term'" in msg


def test_model_copy_variant_does_not_reuse_cached_objects() -> None:
    b = load_basis(DEMO)
    assert float(b.discount_curve().spot(5.0)) == pytest.approx(0.048, abs=1e-12)
    shifted = b.model_copy(update={"discount": b.discount.model_copy(update={"rate": 0.053})})
    assert float(shifted.discount_curve().spot(5.0)) == pytest.approx(0.053, abs=1e-12)
    assert float(b.discount_curve().spot(5.0)) == pytest.approx(0.048, abs=1e-12)


# ---------------------------------------------------------------- messages written for people


@pytest.mark.parametrize(
    ("line", "expected"),
    [
        ('valuation_date = "31/03/2025"', 'expected a date written as YYYY-MM-DD without quotes, e.g. 2025-03-31 '
                                          '(got "31/03/2025")'),
        ("valuation_date = 2025-03-31T10:00:00", "(got 2025-03-31T10:00:00)"),
        ("valuation_date = true", "(got true)"),
    ],
)
def test_values_are_shown_as_written_in_toml(tmp_path: Path, line: str, expected: str) -> None:
    """The value given is shown in the basis file's own notation (TOML), never as a Python repr."""
    msg = error_of(tmp_path, MINIMAL.replace("valuation_date = 2025-03-31", line))
    assert "key 'valuation_date': expected a date" in msg and expected in msg
    assert "datetime." not in msg and "True" not in msg and "'31/03/2025'" not in msg


def test_validator_messages_do_not_repeat_the_value(tmp_path: Path) -> None:
    msg = error_of(tmp_path, MINIMAL + '[mapping]\ndate_format = "%d-%m"\n')
    assert msg.count("%d-%m") == 1 and 'needs day (%d), month (%m) and four-digit year (%Y) directives' in msg
    msg = error_of(tmp_path, MINIMAL + '[benefits]\naccrual_rate = "1/0"\n')
    assert "key 'benefits.accrual_rate': not a number or a fraction like \"1/60\" (got \"1/0\")" in msg
    assert "expected 'udd' or 'constant_force'" in error_of(tmp_path, MINIMAL + '[conventions]\nfractional_age = "UDD"\n')


def test_basis_not_utf8_names_the_line(tmp_path: Path) -> None:
    """A basis saved as Latin-1 (byte 0xE9 for e-acute, ISO 8859-1 table) is named with its line."""
    p = tmp_path / "basis.toml"
    p.write_bytes(MINIMAL.replace('name = "t"', 'name = "Caf\xe9"').encode("latin-1"))
    with pytest.raises(BasisError) as info:
        load_basis(p)
    assert str(info.value).startswith(f"{p}: the file is not UTF-8 text: line 2 holds the byte 0xE9")
    assert info.value.fix is not None and "UTF-8" in info.value.fix


def test_table_error_in_the_basis_says_its_fix_once(tmp_path: Path) -> None:
    """A table file's own error, passed on as a basis error, keeps one fix (ValuationError.with_context rule)."""
    (tmp_path / "t.csv").write_text("age,q\n60,0.1\n61,0.2\n", encoding="utf-8")  # no closing age with q = 1
    msg = error_of(tmp_path, MINIMAL.replace('table = "SULT"', 'table = "t.csv"', 1))
    assert msg.count("(fix:") == 1 and "mortality.default.M" in msg and "t.csv" in msg


def test_curve_file_read_errors_say_where(tmp_path: Path) -> None:
    """A curve file with a row longer than its header, or not UTF-8, is named with the row or line."""
    (tmp_path / "c.csv").write_text("term,rate\n1,0.03\n5,0,04\n", encoding="utf-8")
    msg = error_of(tmp_path, MINIMAL.replace("[discount]\nrate = 0.05", '[discount]\ncurve = "c.csv"'))
    assert "c.csv: curve file for 'discount.curve': row 3 has 3 values but the header names 2 columns" in msg
    assert "Schema" not in msg and "truncate_ragged_lines" not in msg
    (tmp_path / "d.csv").write_bytes("term,rate\n1,0.03\n5,0.04 \xa7\n".encode("latin-1"))
    msg = error_of(tmp_path, MINIMAL.replace("[discount]\nrate = 0.05", '[discount]\ncurve = "d.csv"'))
    assert "line 3 holds the byte 0xA7" in msg


@pytest.mark.parametrize(
    ("lines", "expected"),
    [
        ("max_pension = 10.0", "'max_pension' (10.00) must be above 'large_pension' (100,000.00)"),
        ("large_salary = 2e9", "'max_salary' (1,000,000,000.00) must be above 'large_salary'"),
        ("tiny_pension = 200000.0", "'tiny_pension' (200,000.00) must be below 'large_pension'"),
        ("min_working_age = 40", "thresholds.min_working_age"),
    ],
)
def test_threshold_limits_are_consistent(tmp_path: Path, lines: str, expected: str) -> None:
    assert expected in error_of(tmp_path, MINIMAL + "[thresholds]\n" + lines + "\n")


def test_threshold_defaults() -> None:
    """Defaults stated in the README's basis table (our choice; common practice for data checks)."""
    t = load_basis(SULT).thresholds
    assert (t.large_salary, t.max_pension, t.max_salary) == (500_000.0, 1e9, 1e9)
    assert (t.min_working_age, t.min_spouse_age, t.max_spouse_age_gap) == (15.0, 16.0, 30.0)


@pytest.mark.parametrize(
    ("text", "line", "expected"),
    [
        ('name = "t"\nname = "u"\n', 2,
         'this key already has a value (give each key once in its table) (the line reads: name = "u")'),
        ("[discount]\nrate = 0.05\n[discount]\n", 3,
         "the table [discount] is declared twice (the line reads: [discount])"),
        ('name = "t\n', 1, 'the line ends inside quoted text (a closing " is missing)'),
        ("valuation_date = 31/03/2025\n", 1, "dates are written YYYY-MM-DD"),
    ],
)
def test_toml_syntax_errors_in_words(tmp_path: Path, text: str, line: int, expected: str) -> None:
    """TOML v1.0.0 rules (toml.io): a key is defined once, a table is declared once, strings are quoted."""
    msg = error_of(tmp_path, text)
    assert f"not valid TOML at line {line}, column " in msg and expected in msg
    assert "('" not in msg and "\\n" not in msg  # no Python tuple or string reprs


@pytest.mark.parametrize(
    ("change", "words"),
    [
        ("[discount]\nrate = false", ["discount.rate", "false"]),
        ("[payment]\nfrequency = true", ["payment.frequency", "expected 1, 2, 4 or 12", "true"]),
        ("[[sensitivities]]\nname = \"x\"\nkind = \"discount_rate\"\nshift = nan", ["sensitivities[0].shift"]),
        ("[[sensitivities]]\nname = \"x\"\nkind = \"life_expectancy\"\nshift = 1000.0", ["outside -10 to 10 years"]),
        ("[mapping]\ndate_format = \"%d/%m/%y\"", ["mapping.date_format", "four-digit year"]),
    ],
)
def test_values_that_would_change_numbers_silently_are_refused(tmp_path: Path, change: str, words: list[str]) -> None:
    """TOML (v1.0.0) booleans are not numbers, nan/inf are not rates, a two-digit year is ambiguous, and a
    sensitivity's shift must describe a sensitivity (common practice): each is a message, never a value."""
    text = MINIMAL.replace("[discount]\nrate = 0.05\n", "") if "[discount]" in change else MINIMAL
    msg = error_of(tmp_path, text + "\n" + change + "\n")
    for w in words:
        assert w in msg, msg
