"""ptype.engine.columns: level ordering of ``Columns.from_arrays`` (compiled pass against numpy)."""

from __future__ import annotations

import numpy as np
import pytest

from ptype.engine import columns as cmod
from ptype.engine.columns import Columns


def _messy_levels(seed: int, n: int = 3000, L: int = 25):
    rng = np.random.default_rng(seed)
    p = np.sort(rng.uniform(150.0, 1050.0, (n, L)), axis=1)[:, ::-1].copy()  # surface -> top
    kind = rng.integers(0, 5, n)
    p[kind == 1] = p[kind == 1, ::-1]                                       # top -> surface
    shuffled = kind == 2
    p[shuffled] = rng.permuted(p[shuffled], axis=1)                         # any order
    p[kind == 3, 5:9] = p[kind == 3, 5:6]                                   # equal pressures
    t = rng.uniform(-60.0, 30.0, (n, L))
    td = t - rng.uniform(-2.0, 25.0, (n, L))                                # some Td > T
    z = rng.uniform(0.0, 12000.0, (n, L))
    for a, frac in ((p, 0.05), (t, 0.05), (td, 0.05), (z, 0.1)):
        a[rng.random((n, L)) < frac] = np.nan
    p[rng.random((n, L)) < 0.02] = -5.0                                     # not a pressure
    return p, t, td, z


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_order_levels_compiled_matches_numpy(seed):
    # Consistency check: the one-pass compiled ordering must give the stable argsort's result
    # bit for bit (common practice: a refactor may not change the order of equal pressures).
    if not cmod._COMPILED:
        pytest.skip("numba not installed")
    p, t, td, z = _messy_levels(seed)
    want = cmod._order_levels_numpy(p, t, td, z, True)
    got = cmod._order_levels(p, t, td, z)
    for a, b in zip(want, got):
        np.testing.assert_array_equal(a, b)


def test_from_arrays_orders_surface_to_top_and_pads():
    p = np.array([[500.0, np.nan, 1000.0, 850.0], [1000.0, 850.0, 700.0, 500.0]])
    t = np.array([[-20.0, 0.0, 5.0, 1.0], [5.0, 1.0, -5.0, -20.0]])
    td = np.array([[-25.0, 0.0, 6.0, 0.0], [4.0, 0.0, -6.0, -25.0]])
    cols = Columns.from_arrays(p, t, td, np.zeros_like(p) + np.array([5500.0, 0, 100, 1500]))
    np.testing.assert_array_equal(cols.pressure_hpa[0, :3], [1000.0, 850.0, 500.0])
    assert np.isnan(cols.pressure_hpa[0, 3])
    np.testing.assert_array_equal(cols.dewpoint_c[0, :3], [5.0, 0.0, -25.0])  # Td capped at T
    np.testing.assert_array_equal(cols.height_m[0, :3], [100.0, 1500.0, 5500.0])
    np.testing.assert_array_equal(cols.n_levels, [3, 4])
