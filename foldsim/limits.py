"""How much work net counting, listing and the stack-up do by default.

Kept apart from `netcount` and `stackup` so that the command line can show these defaults in its
``--help`` without loading numpy, scipy and networkx.
"""

DEFAULT_LIMIT = 10_000_000
"""Spanning trees `netcount` enumerates before it stops listing (the counts are exact either way)."""

DEFAULT_MAX_STATES = 1_000_000
"""Partial states one symmetry's fixed-tree count may visit."""

DEFAULT_SAMPLES = 10_000
"""Monte Carlo samples of the play stack-up."""

DEFAULT_TIMES = (0.25, 0.5, 0.75, 1.0)
"""Drive values the play stack-up analyses."""
