"""Load a basis TOML file and turn validation failures into readable :class:`BasisError` messages."""

from __future__ import annotations

import re
import tomllib
import types
import typing
from datetime import date, datetime, time
from pathlib import Path
from typing import Any

from pydantic import BaseModel, ValidationError

from valuation.basis.model import Basis
from valuation.csvtext import encoding_problem
from valuation.errors import BasisError
from valuation.vocabulary import SEXES

_FIX = "correct the key named above; every key and its allowed values are described in assumptions/demo_basis.toml"


def _unwrap(tp: Any) -> list[Any]:
    """The candidate types behind ``Annotated``, ``Optional`` and unions."""
    origin = typing.get_origin(tp)
    if origin is typing.Annotated:
        return _unwrap(typing.get_args(tp)[0])
    if origin in (typing.Union, types.UnionType):
        out: list[Any] = []
        for a in typing.get_args(tp):
            out.extend(_unwrap(a))
        return out
    return [tp]


def _field(model: type[BaseModel], part: str) -> Any:
    for name, info in model.model_fields.items():
        if part in (name, info.alias):
            return info.annotation
    return None


def _walk(loc: tuple[Any, ...]) -> tuple[list[str], Any]:
    """Dotted key parts of a pydantic error location, and the type found at its end.

    Union discriminator tags and pydantic's ``[key]`` markers are dropped from the key.
    """
    parts: list[str] = []
    current: list[Any] = [Basis]
    for part in loc:
        if part == "[key]":
            continue
        nxt: list[Any] = []
        is_tag = False
        for tp in current:
            for cand in _unwrap(tp):
                origin = typing.get_origin(cand)
                if isinstance(cand, type) and issubclass(cand, BaseModel):
                    kind = cand.model_fields.get("kind")
                    if (kind is not None and len(current) == 1 and len(_unwrap(tp)) > 1
                            and part in typing.get_args(kind.annotation)):
                        nxt.append(cand)
                        is_tag = True
                    elif isinstance(part, str) and _field(cand, part) is not None:
                        nxt.append(_field(cand, part))
                elif origin is dict:
                    nxt.append(typing.get_args(cand)[1])
                elif origin in (list, tuple):
                    nxt.append(typing.get_args(cand)[0])
        if not is_tag:
            parts.append(f"[{part}]" if isinstance(part, int) else str(part))
        current = nxt or [None]
    return parts, current[0] if len(current) == 1 else None


def _dotted(parts: list[str]) -> str:
    out = ""
    for p in parts:
        out += p if p.startswith("[") or not out else f".{p}"
    return out or "(top level)"


#: Pydantic's own wording for common problems, said in the basis file's terms.
_PLAIN: dict[str, str] = {
    "float_parsing": "expected a number, such as 0.045 (without quotes)",
    "float_type": "expected a number, such as 0.045",
    "int_parsing": "expected a whole number (without quotes)",
    "int_type": "expected a whole number",
    "int_from_float": "expected a whole number, not a number with a fractional part",
    "string_type": "expected a text in double quotes",
    "bool_type": "expected true or false",
    "bool_parsing": "expected true or false",
    "list_type": "expected a list in square brackets, e.g. [1, 2]",
    "dict_type": "expected a table (a [section] or { key = value, ... })",
}


def describe(err: dict[str, Any]) -> str:
    """One readable sentence for one pydantic error: the dotted key, the problem, the value given."""
    loc = tuple(err.get("loc", ()))
    kind = err.get("type", "")
    if kind == "extra_forbidden":
        parts, _ = _walk(loc[:-1])
        _, parent = _walk(loc[:-1]) if loc[:-1] else ([], Basis)
        allowed = ""
        models = [c for c in _unwrap(parent) if isinstance(c, type) and issubclass(c, BaseModel)]
        if models:
            names = [info.alias or n for n, info in models[0].model_fields.items() if n != "source_path"]
            allowed = f"; allowed keys here: {', '.join(names)}"
        return f"unknown key '{_dotted([*parts, str(loc[-1])])}' (misspelt?){allowed}"
    parts, _ = _walk(loc)
    key = _dotted(parts)
    if kind == "missing":
        return f"key '{key}' is required"
    msg = str(err.get("msg", "")).removeprefix("Value error, ")
    if msg.startswith("Input should be "):
        msg = "expected " + msg.removeprefix("Input should be ")
    if kind.startswith(("date_", "datetime_")):
        msg = "expected a date written as YYYY-MM-DD without quotes, e.g. 2025-03-31"
    msg = _PLAIN.get(kind, msg)
    if kind == "string_pattern_mismatch":
        msg = "expected letters, digits, '_', '.' or '-' only, starting with a letter or digit"
    if kind in ("too_short", "too_long"):
        ctx = err.get("ctx") or {}
        msg = (f"expected at least {ctx.get('min_length')} item(s)" if kind == "too_short"
               else f"expected at most {ctx.get('max_length')} item(s)")
    given = err.get("input")
    shown = "" if isinstance(given, dict | list) or given is None else f" (got {toml_text(given)})"
    if "[key]" in loc:
        shown = f" (got key {toml_text(loc[loc.index('[key]') - 1])})"
    if not parts:  # a check across keys: its message names the keys itself
        return f"{msg}{shown}"
    return f"key '{key}': {msg}{shown}"


def toml_text(value: Any) -> str:
    """A value as it is written in a TOML file: ``"text"``, ``true``, ``2025-03-31``, ``0.05``."""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, str):
        return '"' + value.replace("\\", "\\\\").replace('"', '\\"') + '"'
    if isinstance(value, datetime | date | time):
        return value.isoformat()
    return str(value)


_TOML_WORDS: tuple[tuple[str, str], ...] = (
    (r"^Cannot declare \((.*)\) twice$", "the table [{key}] is declared twice"),
    (r"^Cannot overwrite a value$", "this key already has a value (give each key once in its table)"),
    (r"^Illegal character '\\n'$", "the line ends inside quoted text (a closing \" is missing)"),
    (r"^Invalid value$", "the value after '=' is missing or not a TOML value (text needs double quotes)"),
    (r"^Expected newline or end of document after a statement$",
     "unexpected text after the value (text needs double quotes; dates are written YYYY-MM-DD)"),
)


def toml_problem(message: str, text: str) -> str:
    """A TOML syntax error in words, with the line it is on and what that line reads."""
    m = re.search(r"\s*\(at line (\d+), column (\d+)\)\s*$", message)
    at_end = re.search(r"\s*\(at end of document\)\s*$", message)
    cut = m or at_end
    head = message[: cut.start()] if cut else message
    for pattern, words in _TOML_WORDS:
        hit = re.match(pattern, head)
        if hit:
            key = ".".join(re.findall(r"'([^']*)'", hit.group(1))) if hit.groups() else ""
            head = words.format(key=key)
            break
    if m is None:
        return f"not valid TOML{' at the end of the file' if at_end else ''}: {head}"
    line, column = int(m.group(1)), int(m.group(2))
    lines = text.splitlines()
    shown = lines[line - 1].strip() if 0 < line <= len(lines) else ""
    reads = f" (the line reads: {shown})" if shown else ""
    return f"not valid TOML at line {line}, column {column}: {head}{reads}"


def basis_error(exc: ValidationError, path: Path) -> BasisError:
    """A :class:`BasisError` listing every validation problem of a basis file."""
    problems = [describe(dict(e)) for e in exc.errors()]
    return BasisError("; ".join(problems), file=path, fix=_FIX)


def load_basis(path: str | Path) -> Basis:
    """Read and validate a basis TOML file; build its curves and mortality bases once.

    Parameters
    ----------
    path : str or Path
        The TOML file. Paths inside it are relative to its folder.

    Returns
    -------
    Basis

    Raises
    ------
    BasisError
        File missing, not valid TOML, an unknown key, a value out of range, or a table / curve file
        that cannot be found; the message names the file and the dotted key with the allowed values.
    """
    p = Path(path)
    if not p.is_file():
        raise BasisError("basis file not found", file=p, fix="give the path of a .toml assumptions file")
    try:
        text = p.read_text(encoding="utf-8")
    except UnicodeDecodeError as exc:
        problem = encoding_problem(p)
        reason = problem.reason if problem is not None else "the file is not UTF-8 text"
        raise BasisError(reason, file=p,
                         fix="save the basis file as UTF-8 text (choose UTF-8 as the encoding when saving)") from exc
    except OSError as exc:
        raise BasisError(f"cannot be opened ({(exc.strerror or 'not allowed').lower()})", file=p,
                         fix="check that the file can be read by the user running the valuation") from exc
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise BasisError(toml_problem(str(exc), text), file=p, fix="correct the syntax of that line") from exc
    if "source_path" in data:
        raise BasisError("unknown key 'source_path' (misspelt?)", file=p, fix=_FIX)
    try:
        basis = Basis.model_validate({**data, "source_path": p.resolve()})
    except ValidationError as exc:
        raise basis_error(exc, p) from None
    basis.discount_curve()
    basis.inflation_curve()
    for group in ("pensioner", "deferred", "active", "dependant", "spouse"):
        for sex in SEXES:
            basis.mortality(group, sex)  # type: ignore[arg-type]
    return basis
