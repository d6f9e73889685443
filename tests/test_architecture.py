"""The import rule of DEVELOPERS.md ("Which package may import which"), enforced on the source.

Every ``import valuation...`` and ``from valuation... import`` in the package, at module level or inside a
function, is checked against the rule: a part may import only the parts listed for it. The rule keeps the
layers of the architecture (common practice for layered designs, as in chainladder-python's ARCHITECTURE.md):
the formulas know nothing of files, the engine nothing of reports, the experience analysis nothing of the
engine (it is handed a way to re-value), and only the pipeline and the command line see everything.
"""

from __future__ import annotations

import ast
from pathlib import Path

PACKAGE = Path(__file__).resolve().parents[1] / "valuation"

BOTTOM = {"vocabulary", "errors", "version", "manifest", "csvtext", "csvout"}
FORMULAS = {"survival", "discounting", "annuities", "expectancy"}

#: part -> the parts it may import (besides itself).
ALLOWED: dict[str, set[str]] = {
    **{part: set() for part in ("vocabulary", "errors", "version")},
    "manifest": set(),
    "csvtext": {"errors"},
    "csvout": set(),
    "survival": {"errors", "vocabulary"},
    "discounting": {"errors"},
    "annuities": {"errors", "survival", "discounting"},
    "expectancy": {"errors", "survival"},
    "mortality": BOTTOM | FORMULAS,
    "basis": BOTTOM | FORMULAS | {"mortality"},
    "members": BOTTOM | FORMULAS | {"mortality", "basis"},
    "engine": BOTTOM | FORMULAS | {"mortality", "basis", "members"},
    "experience": BOTTOM | FORMULAS | {"mortality", "basis", "members"},
    "movements": BOTTOM | FORMULAS | {"mortality", "basis", "members", "experience"},
    "reports": BOTTOM | FORMULAS | {"mortality", "basis", "members", "engine", "experience", "movements"},
    "pipeline": BOTTOM | FORMULAS | {"mortality", "basis", "members", "engine", "experience", "movements", "reports"},
    "batch": BOTTOM | FORMULAS | {"mortality", "basis", "members", "engine", "experience", "movements", "reports",
                                  "pipeline"},
    "cli": BOTTOM | FORMULAS | {"mortality", "basis", "members", "engine", "experience", "movements", "reports",
                                "pipeline", "batch", "valuation"},
    "valuation": BOTTOM | FORMULAS | {"mortality", "basis", "members", "engine", "experience", "movements",
                                      "reports", "pipeline", "batch"},
}


def _part(module: str) -> str:
    """``valuation.engine.run`` -> ``engine``; ``valuation.cli`` -> ``cli``; ``valuation`` -> ``valuation``."""
    parts = module.split(".")
    return parts[1] if len(parts) > 1 else "valuation"


def _imports() -> list[tuple[str, str, str]]:
    """(importing part, imported part, file:line) for every import of the package inside the package."""
    found = []
    for path in sorted(PACKAGE.rglob("*.py")):
        rel = path.relative_to(PACKAGE.parent).with_suffix("")
        module = ".".join(rel.parts).removesuffix(".__init__")
        source = _part(module)
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            names: list[str] = []
            if isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
                names = [node.module] if node.module != "valuation" else [f"valuation.{a.name}" for a in node.names]
            elif isinstance(node, ast.Import):
                names = [a.name for a in node.names]
            for name in names:
                if name == "valuation" or name.startswith("valuation."):
                    target = _part(name) if name != "valuation.__version__" else "version"
                    if target != source:
                        found.append((source, target, f"{path.relative_to(PACKAGE.parent)}:{node.lineno}"))
    return found


def test_every_part_is_in_the_rule():
    parts = {_part(".".join(p.relative_to(PACKAGE.parent).with_suffix("").parts).removesuffix(".__init__"))
             for p in PACKAGE.rglob("*.py")}
    assert parts <= set(ALLOWED), f"parts missing from the import rule: {sorted(parts - set(ALLOWED))}"


def test_imports_follow_the_rule():
    broken = [f"{where}: {source} imports {target}" for source, target, where in _imports()
              if target not in ALLOWED[source]]
    assert not broken, "imports against the rule in DEVELOPERS.md:\n" + "\n".join(broken)


def test_the_rule_has_no_cycle():
    """The allowed graph itself is acyclic, so no import cycle can be written within the rule."""
    state: dict[str, int] = {}

    def visit(part: str, path: tuple[str, ...]) -> None:
        if state.get(part) == 1:
            raise AssertionError(f"cycle in the rule: {' -> '.join((*path, part))}")
        if state.get(part) == 2:
            return
        state[part] = 1
        for nxt in ALLOWED[part]:
            visit(nxt, (*path, part))
        state[part] = 2

    for part in ALLOWED:
        visit(part, ())
