"""Optional numba compilation of the engine's per-column loops.

numba is a declared dependency.  Every compiled loop keeps a numpy path that gives the same
numbers: installs without numba use it, and the tests compare the two
(``tests/test_engine_regression.py``).  :mod:`ptype.thermo.fast` builds its own variants
(serial and parallel) and does not use this module.
"""

from __future__ import annotations

from collections.abc import Callable

try:
    from numba import njit as _njit
    AVAILABLE = True
except ImportError:  # pragma: no cover - exercised only on installs without numba
    _njit = None
    AVAILABLE = False


def compiled(func: Callable, *, numpy_errors: bool = False,
             inline: bool = False) -> Callable | None:
    """``func`` compiled with numba (cached on disk, releasing the GIL), or None without numba.

    ``numpy_errors`` selects ``error_model="numpy"``: ``x / 0`` gives inf or NaN as in numpy
    instead of raising.  ``inline`` inlines a small helper into the compiled loops that call it.
    """
    if not AVAILABLE:
        return None
    options = {"cache": True, "nogil": True}
    if numpy_errors:
        options["error_model"] = "numpy"
    if inline:
        options["inline"] = "always"
    return _njit(**options)(func)
