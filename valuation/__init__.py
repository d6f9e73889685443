"""valuation: batch valuation of defined-benefit pension schemes.

One call for notebook users::

    from valuation import value_scheme
    res = value_scheme("assumptions/demo_basis.toml", "member_data_demo/members.csv")

See README.md for the commands and DEVELOPERS.md for the architecture.
"""

from __future__ import annotations

from valuation.version import __version__  # isort: split

from valuation.basis import load_basis
from valuation.engine.run import value_members
from valuation.engine.stream import value_file_streaming
from valuation.members import members_from_frame, read_members
from valuation.pipeline import run, value_scheme, write_run

__all__ = ["__version__", "load_basis", "members_from_frame", "read_members", "run", "value_file_streaming",
           "value_members", "value_scheme", "write_run"]
