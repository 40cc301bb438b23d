"""The diagnosis engine: from a batch of columns to the type at the ground, its probability
and its reasons.  It never imports the road side, grids, plots, the store or the service
(``tests/test_layering.py`` enforces it).

====================  ========================================================================
module                what it holds
====================  ========================================================================
:mod:`.columns`       :class:`Columns`: many profiles as NaN-padded ``(n, L)`` arrays
:mod:`.layers`        warm/cold layers and their areas, freezing levels, cloud and dry layers
:mod:`.methods`       one module per published method, interface in :mod:`.methods.base`
:mod:`.consensus`     the methods combined into one type per column, with its reasons
:mod:`.probability`   the Monte-Carlo members' perturbations and the confidence words
:mod:`.run`           :func:`run_columns`, the one entry point every path calls
:mod:`.explain`       the plain-language narrative of one diagnosis
:mod:`.diagnosis`     :func:`diagnose`, :func:`diagnose_many` and :class:`Diagnosis`
:mod:`.compiled`      the optional numba compilation of the per-column loops
====================  ========================================================================
"""

from __future__ import annotations

from ptype.engine.columns import Columns
from ptype.engine.diagnosis import Diagnosis, diagnose, diagnose_many
from ptype.engine.run import EngineRun, run_columns

__all__ = ["Columns", "Diagnosis", "EngineRun", "diagnose", "diagnose_many", "run_columns"]
