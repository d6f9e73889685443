"""valuation: batch valuation of defined-benefit pension schemes.

The public entry points are re-exported here once they exist; see DEVELOPERS.md for the architecture.
"""

__version__ = "0.1.0"
