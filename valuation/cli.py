"""Command line: parses arguments and calls the library (filled in by the valuation and reporting work)."""

from __future__ import annotations

import sys


def main(argv: list[str] | None = None) -> int:
    print("valuation: commands are not wired yet", file=sys.stderr)
    return 2


if __name__ == "__main__":  # pragma: no cover
    raise SystemExit(main())
