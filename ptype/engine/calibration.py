"""Calibrated probabilities: a fitted multinomial logistic model over the engine's outputs.

The member frequencies of :mod:`ptype.engine.probability` say how often perturbed profiles
give each type; they are not yet probabilities that verify (a type given by 90 % of the
members need not be observed 90 % of the time).  A calibration, fitted on paired cases
(profiles with observed weather, ``ptype calibrate``), maps what the engine knows about a
column to probabilities:

``p(type | x) = softmax(W x + b)``, a multinomial logistic regression (e.g. Wilks,
*Statistical Methods in the Atmospheric Sciences*, ch. on forecast calibration; fitted with
scikit-learn's ``LogisticRegression``, L2-penalised), with ``x`` the standardised features of
:data:`FEATURES`: the member frequency of each type, the weighted vote share of each type,
the melting energies (aloft and at the surface, wet-bulb), the refreezing and melting areas
(Bourgouin), and the surface temperature and wet-bulb.

A calibration is a JSON document (never executable: no pickle), which this module reads and
applies with numpy alone; fitting (scikit-learn) lives in :mod:`ptype.verify.calibration`.
Types the model never saw keep probability 0; types the profile's phase path rules out are
removed and the rest renormalised, so a calibrated answer stays physically possible.
"""

from __future__ import annotations

import dataclasses
import json
from collections.abc import Mapping
from pathlib import Path
from typing import Any

import numpy as np

from ptype.codes import Code
from ptype.errors import OptionError

FORMAT = "ptype-calibration"
VERSION = 1
CODES = tuple(c.name for c in Code)
#: The features, in order: member frequencies and vote shares per type, then the column's
#: energies and surface values.
FEATURES = (tuple(f"p_{c}" for c in CODES) + tuple(f"vote_{c}" for c in CODES)
            + ("log_melt_aloft", "log_melt_surface", "log_warm_area", "log_cold_area",
               "surface_temperature_c", "surface_wetbulb_c"))


def features(fields: Mapping[str, np.ndarray], probabilities: np.ndarray) -> np.ndarray:
    """``(n, len(FEATURES))`` features of the columns of an engine run: its ``fields`` (as
    :func:`ptype.engine.run.diagnose_columns` gives them) and member ``probabilities``."""
    votes = np.asarray(fields["vote_share"], dtype=np.float64)

    def log1p(key):
        return np.log1p(np.maximum(np.nan_to_num(np.asarray(fields[key], dtype=np.float64)),
                                   0.0))

    rest = np.column_stack([log1p("melt_aloft_j_kg"), log1p("melt_surface_j_kg"),
                            log1p("warm_area_j_kg"), log1p("cold_area_j_kg"),
                            np.nan_to_num(fields["surface_temperature_c"]),
                            np.nan_to_num(fields["surface_wetbulb_c"])])
    return np.column_stack([np.nan_to_num(probabilities), votes, rest])


@dataclasses.dataclass(frozen=True)
class Calibration:
    """A fitted calibration (see the module notes); :meth:`to_dict` is its JSON document."""

    classes: tuple[str, ...]
    coef: np.ndarray          # (len(classes), len(FEATURES))
    intercept: np.ndarray     # (len(classes),)
    mean: np.ndarray          # (len(FEATURES),)
    scale: np.ndarray         # (len(FEATURES),)
    n_cases: int
    fitted: str
    source: str
    extra: dict = dataclasses.field(default_factory=dict)

    def apply(self, x: np.ndarray, possible: np.ndarray | None = None) -> np.ndarray:
        """Calibrated probabilities ``(n, len(Code))`` from features ``x``; codes outside
        ``possible`` (``(n, len(Code))``) get 0 and the rest are renormalised."""
        z = (np.asarray(x, dtype=np.float64) - self.mean) / self.scale
        logits = z @ self.coef.T + self.intercept
        logits -= logits.max(axis=1, keepdims=True)
        p = np.exp(logits)
        p /= p.sum(axis=1, keepdims=True)
        out = np.zeros((x.shape[0], len(Code)))
        for j, name in enumerate(self.classes):
            out[:, Code[name]] = p[:, j]
        if possible is not None:
            kept = np.where(possible, out, 0.0)
            total = kept.sum(axis=1, keepdims=True)
            # With nothing possible left (a type the model never saw), keep the model's answer.
            out = np.where(total > 0, kept / np.where(total > 0, total, 1.0), out)
        return out

    def summary(self) -> dict[str, Any]:
        """What every calibrated output carries: where the calibration came from."""
        return {"n_cases": self.n_cases, "fitted": self.fitted, "source": self.source,
                "model": "multinomial logistic regression", "classes": list(self.classes)}

    def to_dict(self) -> dict[str, Any]:
        return {"format": FORMAT, "version": VERSION, "features": list(FEATURES),
                "classes": list(self.classes), "coef": self.coef.tolist(),
                "intercept": self.intercept.tolist(), "mean": self.mean.tolist(),
                "scale": self.scale.tolist(), "n_cases": self.n_cases, "fitted": self.fitted,
                "source": self.source, **self.extra}

    def save(self, path: str | Path) -> None:
        Path(path).write_text(json.dumps(self.to_dict(), indent=1) + "\n", encoding="utf-8")

    @classmethod
    def from_dict(cls, doc: Any, name: str = "calibration") -> Calibration:
        """Read a calibration document; a wrong one raises :class:`OptionError` naming the
        field."""
        if not isinstance(doc, dict) or doc.get("format") != FORMAT:
            raise OptionError(f"{name}: not a ptype calibration (expected \"format\": "
                              f"\"{FORMAT}\")", field="calibration")
        if doc.get("version") != VERSION or list(doc.get("features", [])) != list(FEATURES):
            raise OptionError(f"{name}: calibration version {doc.get('version')!r} with other "
                              f"features; refit it with this version of ptype",
                              field="calibration")
        try:
            classes = tuple(str(c) for c in doc["classes"])
            for c in classes:
                Code[c]
            coef = np.asarray(doc["coef"], dtype=np.float64)
            intercept = np.asarray(doc["intercept"], dtype=np.float64)
            mean = np.asarray(doc["mean"], dtype=np.float64)
            scale = np.asarray(doc["scale"], dtype=np.float64)
            n_cases = int(doc["n_cases"])
        except (KeyError, TypeError, ValueError) as exc:
            raise OptionError(f"{name}: broken calibration ({type(exc).__name__}: {exc})",
                              field="calibration") from None
        k, f = len(classes), len(FEATURES)
        if coef.shape != (k, f) or intercept.shape != (k,) or mean.shape != (f,) \
                or scale.shape != (f,) or not np.all(np.isfinite(coef)) \
                or not np.all(scale > 0):
            raise OptionError(f"{name}: calibration arrays have the wrong shape or values",
                              field="calibration")
        extra = {key: value for key, value in doc.items() if key in ("members", "seed", "cv")}
        return cls(classes, coef, intercept, mean, scale, n_cases, str(doc.get("fitted", "")),
                   str(doc.get("source", "")), extra)

    @classmethod
    def load(cls, path: str | Path) -> Calibration:
        path = Path(path)
        try:
            doc = json.loads(path.read_text(encoding="utf-8"))
        except OSError as exc:
            raise OptionError(f"{path}: cannot read the calibration ({exc.strerror})",
                              field="calibration") from None
        except (UnicodeDecodeError, json.JSONDecodeError) as exc:
            raise OptionError(f"{path.name}: not a JSON calibration ({exc})",
                              field="calibration") from None
        return cls.from_dict(doc, path.name)


UNCALIBRATED = {"calibrated": False,
                "note": "uncalibrated: member frequencies, not verified probabilities"}
