"""valuation: batch valuation of defined-benefit pension schemes.

One call for notebook users::

    from valuation import value_scheme
    res = value_scheme("assumptions/demo_basis.toml", "member_data_demo/members.csv")

Year on year: ``movements`` (membership movements between two extracts), ``change`` (the analysis of
change between two valuations) and ``rollforward`` (a valuation moved to a later date, approximately).

See README.md for the commands and DEVELOPERS.md for the architecture.
"""

from __future__ import annotations

from valuation.version import __version__  # isort: split

from valuation.basis import load_basis
from valuation.engine.run import value_members
from valuation.engine.stream import value_file_streaming
from valuation.members import members_from_frame, read_members
from valuation.pipeline import change, movements, rollforward, run, value_scheme, write_run

__all__ = ["__version__", "change", "load_basis", "members_from_frame", "movements", "read_members", "rollforward",
           "run", "value_file_streaming", "value_members", "value_scheme", "write_run"]
