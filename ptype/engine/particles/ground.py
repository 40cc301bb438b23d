"""What reaches the ground: the mass of every bin sorted into snow, melting snow, liquid and
refrozen ice.

A bin holds a fraction ``q`` of particles with ice, all alike, and ``1 - q`` drops with no ice
(:mod:`ptype.engine.particles.march`).  The drops are **liquid**.  A particle with ice, whose
mass is ``s'`` snow, ``w'`` liquid and ``r'`` refrozen ice (``s' = s / q`` and so on), is sorted
by the first row of this table that fits (thresholds ours, stated in ``docs/particles.md``):

=========================================  ==========  =======================================
particle with ice                          class       what lands
=========================================  ==========  =======================================
melted ``1 - s' < WET``                    snow        a (nearly) dry flake
``r' >= w'``, ``1 - s' >= PELLET_MELT``    refrozen    a pellet: most of its melt water froze
                                                       again (drops freezing from a shell too)
``r' >= w'``                               snow        a flake that barely melted and froze
``s' < DROP_CORE``                         liquid      a drop round a small ice core
otherwise                                  melting     a wet, melting flake
=========================================  ==========  =======================================
"""

from __future__ import annotations

import numpy as np

#: A particle with less than this fraction of its snow left has collapsed into a drop round a
#: small ice core and lands as a drop (ours; Mitra et al. 1990 saw flakes collapse into drops
#: near the end of melting, from memory).
DROP_CORE = 0.1
#: A flake that has melted less than this fraction counts as dry snow (ours).
WET = 0.01
#: A particle whose melt water has mostly refrozen (``r' >= w'``) is an ice pellet if at least
#: this fraction of it had melted, else snow (ours: lightly melted flakes refreeze as snow).
PELLET_MELT = 0.2

CLASSES = ("snow", "melting", "liquid", "refrozen")


def classify(snow, liquid, refrozen, ice_holding):
    """Mass fraction of every bin in each class, ``(4, n, B)`` in the order of :data:`CLASSES`.

    Parameters
    ----------
    snow, liquid, refrozen : (n, B) array_like
        Mass fractions of snow, liquid water and refrozen ice of every bin (summing to 1).
    ice_holding : (n, B) array_like
        Fraction ``q`` of the bin's particles that hold ice.

    Returns
    -------
    (4, n, B) ndarray
        Non-negative, summing to 1 over the first axis (NaN where the input is NaN).
    """
    s, w, r, q = (np.asarray(a, dtype=np.float64) for a in (snow, liquid, refrozen, ice_holding))
    q_safe = np.where(q > 0.0, q, 1.0)
    s1 = s / q_safe
    r1 = r / q_safe
    w1 = np.maximum(w - (1.0 - q), 0.0) / q_safe
    melted = 1.0 - s1
    frozen_again = r1 >= w1
    kind = np.select([melted < WET, frozen_again & (melted >= PELLET_MELT), frozen_again,
                      s1 < DROP_CORE], [0, 3, 0, 2], default=1)
    out = np.zeros((4, *s.shape))
    for k in range(4):
        out[k] = np.where(kind == k, q, 0.0)
    out[2] = out[2] + (1.0 - q)
    nan = np.isnan(s) | np.isnan(q)
    out[:, nan] = np.nan
    return out


def ground_fractions(snow, liquid, refrozen, ice_holding, mass_fraction=None):
    """Mass fractions ``(4, n)`` of snow, melting snow, liquid and refrozen ice at the ground:
    :func:`classify` weighted by the mass of each bin (default equal)."""
    parts = classify(snow, liquid, refrozen, ice_holding)
    B = parts.shape[2]
    mf = (np.full(B, 1.0 / B) if mass_fraction is None
          else np.asarray(mass_fraction, dtype=np.float64))
    out = (parts * mf).sum(axis=2)
    return out / out.sum(axis=0, keepdims=True)
