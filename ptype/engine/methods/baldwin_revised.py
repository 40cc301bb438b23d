"""The 2005 revision of the Baldwin et al. (1994) decision tree.

Written to reduce the original's freezing-rain/ice-pellet bias (thresholds as used in
operational model post-processing, see ``docs/methods.md``; citation key ``Baldwin1994``).
It keeps every step of :mod:`ptype.engine.methods.baldwin` except the snow test: instead
of ``AREAP4 < 3000 K m`` it uses

``AREAP0 = integral of Tw dz`` over the parts with ``Tw >= 0 degC`` from the ground to the
highest saturated level; ``AREAP0 < 350 K m`` -> SN.

``Tw`` is the pseudo-adiabatic wet-bulb, as in the original.
"""

from __future__ import annotations

from ptype.engine.methods.baldwin import RULES, explain_revised, run_tree
from ptype.engine.methods.base import Context, MethodResult, Step

NAME = "baldwin_revised"
TITLE = "Baldwin et al. (1994) decision tree, 2005 revision"
REFERENCE = "Baldwin1994"
WETBULB = "adiabatic"

__all__ = ["NAME", "REFERENCE", "RULES", "TITLE", "WETBULB", "explain", "run"]


def run(ctx: Context) -> MethodResult:
    """The revised tree for every column of ``ctx``."""
    return run_tree(ctx, revised=True)


def explain(result: MethodResult, i: int) -> list[Step]:
    """Trace of column ``i``, from ``result.values`` only."""
    return explain_revised(result, i)
