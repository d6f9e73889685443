"""Shared by the report tests that use outside programs: the demo run of the README's quick start, headless
Chromium, poppler's pdfinfo / pdftotext, LibreOffice and axe-core; and a copy of a result whose hostile
probes are among the commonest data problems (the trustee summary lists only the commonest reasons).

Each program is looked up once; a test that needs one that is missing skips and says what to install
(``.ci/run`` installs them all).
"""

from __future__ import annotations

import atexit
import html
import json
import os
import re
import shlex
import shutil
import subprocess
import tempfile
from functools import lru_cache
from pathlib import Path

import polars as pl

from valuation.engine.results import ValuationResult
from valuation.reports.content import TOP_REASONS

ROOT = Path(__file__).resolve().parents[1]

CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser") or (
    "/usr/bin/chromium" if Path("/usr/bin/chromium").exists() else None)
CHROMIUM_FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
                  "--disable-background-networking", "--disable-component-update", "--disable-sync"]
PDFINFO = shutil.which("pdfinfo")
PDFTOTEXT = shutil.which("pdftotext")
SOFFICE = shutil.which("soffice") or shutil.which("libreoffice")


def axe_script() -> Path | None:
    """axe-core's browser bundle: $VALUATION_AXE_JS, else where .ci/run installs it (npm, in a cache
    folder outside the repository)."""
    given = os.environ.get("VALUATION_AXE_JS")
    candidates = [Path(given)] if given else []
    candidates.append(Path.home() / ".cache" / "valuation-axe" / "node_modules" / "axe-core" / "axe.min.js")
    return next((p for p in candidates if p.is_file()), None)


def chromium(tmp: Path, *args: str, timeout: int = 120) -> subprocess.CompletedProcess:
    """Run headless Chromium with a profile of its own in ``tmp``."""
    assert CHROMIUM is not None
    profile = tmp / "chromium-profile"
    profile.mkdir(exist_ok=True)
    return subprocess.run([CHROMIUM, *CHROMIUM_FLAGS, f"--user-data-dir={profile}", *args], capture_output=True,
                          text=True, timeout=timeout, check=False)


def pdf_pages(pdf: Path) -> int:
    """The page count of a PDF, as poppler's pdfinfo reports it."""
    assert PDFINFO is not None
    out = subprocess.run([PDFINFO, str(pdf)], capture_output=True, text=True, check=True).stdout
    match = re.search(r"^Pages:\s+(\d+)", out, flags=re.M)
    assert match, out
    return int(match.group(1))


def pdf_text(pdf: Path, first: int, last: int | None = None, layout: bool = False) -> str:
    """The text of pages ``first`` to ``last`` (1-based) with runs of whitespace collapsed to one space;
    with ``layout``, in the physical layout of the page (a row of a table on one line)."""
    assert PDFTOTEXT is not None
    out = subprocess.run([PDFTOTEXT, *(["-layout"] if layout else []), "-f", str(first), "-l", str(last or first),
                          str(pdf), "-"], capture_output=True, text=True, check=True).stdout
    return " ".join(out.split())


def readme_demo_command() -> list[str]:
    """The arguments of ``valuation run`` in line 1 of the README's quick start."""
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    line = next(x for x in text.splitlines() if "valuation run " in x and "--deaths" in x)
    words = shlex.split(line.split("&&")[-1])
    return words[words.index("run"):]


_TEMP: list[Path] = []


@atexit.register
def _clean() -> None:
    for folder in _TEMP:
        shutil.rmtree(folder, ignore_errors=True)


@lru_cache(maxsize=1)
def demo_run() -> Path:
    """The run folder of the README's quick-start line 1 (the demo scheme with its experience analysis),
    written once a test session into a temporary folder."""
    from valuation.cli import main

    args = readme_demo_command()
    args[args.index("--out") + 1] = "{out}"
    folder = Path(tempfile.mkdtemp(prefix="valuation-demo-"))
    _TEMP.append(folder)
    out = folder / "demo"
    resolved = [str(out) if a == "{out}" else (str(ROOT / a) if (ROOT / a).exists() else a) for a in args]
    code = main([*resolved, "-q"] if "-q" not in resolved and "--quiet" not in resolved else resolved)
    assert code == 0, f"the README's demo command failed with exit code {code}"
    return out


def with_frequent_probes(result: ValuationResult, probes: list[str], times: int = 1000) -> ValuationResult:
    """A copy of ``result`` whose exceptions repeat each probe row ``times`` times as records left out, so
    that the probes' reasons are among the :data:`TOP_REASONS` commonest (records left out come first) and
    reach the trustee summary."""
    exc = result.exceptions
    rows = (exc.filter(pl.col("reason").str.contains("|".join(re.escape(p) for p in probes)))
            .with_columns(pl.lit("excluded").cast(exc.schema["severity"]).alias("severity")))
    assert rows.height, "the fixture has probe rows"
    assert rows.height <= TOP_REASONS
    copy = ValuationResult(summary=result.summary, liabilities=result.liabilities, cashflows=result.cashflows,
                           members=result.members, sensitivities=result.sensitivities,
                           life_expectancy=result.life_expectancy, expected_deaths=result.expected_deaths,
                           exceptions=pl.concat([exc, *[rows] * times], how="vertical"))
    return copy


def axe_violations(page: Path, tmp: Path) -> tuple[list[dict], int]:
    """Run axe-core's WCAG 2.0/2.1/2.2 A and AA rules and its best practices on ``page`` in headless
    Chromium; returns the violations (rule id, impact, help, failing nodes) and the number of rules passed.

    The page is copied with axe's bundle and a runner appended as inline scripts; the runner writes the
    result into an attribute of ``<html>``, read back from ``--dump-dom`` once the page is idle.
    """
    script = axe_script()
    assert script is not None
    tags = ["wcag2a", "wcag2aa", "wcag21a", "wcag21aa", "wcag22aa", "best-practice"]
    runner = (
        "axe.run(document, {runOnly: {type: 'tag', values: %s}, resultTypes: ['violations']})"
        ".then(function (r) { document.documentElement.setAttribute('data-axe', JSON.stringify({"
        "passes: r.passes.length, violations: r.violations.map(function (v) { return {id: v.id, impact: v.impact,"
        " help: v.help, nodes: v.nodes.map(function (n) { return n.target.join(' '); })}; })})); })"
        ".catch(function (e) { document.documentElement.setAttribute('data-axe-error', String(e)); });"
    ) % json.dumps(tags)
    text = page.read_text(encoding="utf-8")
    bundle = script.read_text(encoding="utf-8").replace("</script", "<\\/script")
    probe = tmp / "axe-page.html"
    probe.write_text(text.replace("</body>", f"<script>{bundle}</script><script>{runner}</script></body>"),
                     encoding="utf-8")
    proc = chromium(tmp, "--virtual-time-budget=60000", "--dump-dom", probe.as_uri())
    found = re.search(r'data-axe="([^"]*)"', proc.stdout)
    failed = re.search(r'data-axe-error="([^"]*)"', proc.stdout)
    assert found, f"axe did not report: {html.unescape(failed.group(1)) if failed else proc.stderr[-2000:]}"
    result = json.loads(html.unescape(found.group(1)))
    return result["violations"], int(result["passes"])
