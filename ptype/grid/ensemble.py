"""Ensembles: a member dimension of the model output becomes probabilities per type.

A model ensemble arrives as a ``realization`` dimension (CF standard name ``realization``;
from GRIB2 the perturbation number of product definition templates 4.1/4.11).  Every member
column is diagnosed like any other column; then, per column and time:

* ``probability_of_<type>`` is the fraction of the ensemble members whose consensus type is
  that type (the ensemble relative frequency, the usual estimate of an event probability
  from an ensemble; Wilks 2011, sec. 8.1);
* with our own Monte-Carlo perturbations as well (``members`` > 0, ``ptype grid --members``)
  each ensemble member is widened by them and the probability is the mean over the ensemble
  members of the perturbed-member fractions, i.e. the fraction over all (ensemble x
  perturbation) members — the perturbations represent the errors of a model profile that
  the ensemble spread does not (docs/formats.md, "Ensembles");
* ``most_likely_precipitation_type`` is the type of the highest probability (ties broken
  by :data:`ptype.codes.HAZARD_ORDER`, most hazardous first), as GRIB2 code table 4.201.

The per-member ``precipitation_type`` keeps its member dimension.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import TYPE_CHECKING

import numpy as np

from ptype.codes import HAZARD_ORDER, LABELS, Code

if TYPE_CHECKING:
    import xarray as xr

#: Names of a member dimension recognised without a CF standard name.
MEMBER_DIM_NAMES = ("realization", "member", "ensemble_member", "number")


def member_dim(ds: xr.Dataset, candidates: tuple[str, ...] | None = None) -> str | None:
    """The ensemble member dimension of ``ds``: a dimension whose coordinate has CF
    standard name ``realization``, else one named as in :data:`MEMBER_DIM_NAMES`."""
    dims = candidates if candidates is not None else tuple(ds.dims)
    for d in dims:
        if d in ds.coords and ds[d].attrs.get("standard_name") == "realization":
            return str(d)
    return next((str(d) for d in dims if d in MEMBER_DIM_NAMES), None)


def _label_name(code: Code) -> str:
    return LABELS[code].replace(" ", "_")


def ensemble_probabilities(field: Callable[[str], xr.DataArray], member: str, perturbed: int,
                           n_members: int, extra: dict) -> dict[str, xr.DataArray]:
    """``probability_of_<type>`` over the ensemble member dimension ``member`` (see the
    module notes) from the kernel's fields (``field("ptype")``: float codes, NaN missing;
    ``field("p_<CODE>")`` when ``perturbed`` > 0)."""
    codes = field("ptype")
    valid = codes.notnull()
    n_valid = valid.sum(member)
    out = {}
    for code in Code:
        if perturbed:
            p = field(f"p_{code.name}").where(valid).mean(member, skipna=True)
            how = (f"mean over {n_members} ensemble members of the fraction of {perturbed} "
                   f"Monte-Carlo perturbations of each whose consensus type is {code.name}")
        else:
            p = ((codes == int(code)) & valid).sum(member) / n_valid.where(n_valid > 0)
            how = f"fraction of {n_members} ensemble members whose consensus type is {code.name}"
        out[f"probability_of_{_label_name(code)}"] = p.astype(np.float32).assign_attrs(
            {"long_name": f"probability of {LABELS[code]}", "units": "1",
             "valid_range": np.array([0.0, 1.0], dtype=np.float32), "comment": how, **extra})
    return out


def most_likely_type(probabilities: dict[str, xr.DataArray]) -> xr.DataArray:
    """The type of the highest probability, ties to the most hazardous; float codes, NaN
    where no member was diagnosed."""
    import xarray as xr
    ordered = [probabilities[f"probability_of_{_label_name(c)}"] for c in HAZARD_ORDER]
    stacked = xr.concat(ordered, dim="_type").fillna(-1.0)
    best = stacked.argmax("_type")  # first maximum: the most hazardous of a tie
    lut = np.array([int(c) for c in HAZARD_ORDER], dtype=np.float32)
    any_valid = stacked.max("_type") >= 0.0
    return best.copy(data=best.data.map_blocks(lambda i: lut[i], dtype=np.float32)
                     if hasattr(best.data, "map_blocks") else lut[best.values]).where(any_valid)
