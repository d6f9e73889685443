"""valuation: batch valuation of defined-benefit pension schemes.

One call for notebook users::

    from valuation import value_scheme
    res = value_scheme("assumptions/demo_basis.toml", "member_data_demo/members.csv")

See README.md for the commands and DEVELOPERS.md for the architecture.
"""

from __future__ import annotations

__version__ = "0.1.0"

from valuation.basis import load_basis  # noqa: E402
from valuation.engine.run import value_members, value_scheme  # noqa: E402
from valuation.engine.stream import value_file_streaming  # noqa: E402
from valuation.engine.write import write_run  # noqa: E402
from valuation.members import members_from_frame, read_members  # noqa: E402

__all__ = ["__version__", "load_basis", "members_from_frame", "read_members", "value_file_streaming",
           "value_members", "value_scheme", "write_run"]
