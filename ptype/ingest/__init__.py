"""Model runs into the store: the layer that joins grids (:mod:`ptype.grid`), the store
(:mod:`ptype.store`) and road alerts (:mod:`ptype.roads`).

Modules::

    site_columns   model columns at the sites, bilinear, moved to the site elevation,
                   as profile documents (pure arrays)
    pipeline       ingest_file: claim -> read -> extract -> store (one transaction) -> alerts
    inbox          Inbox: a polled folder whose complete files are ingested once
    sites_file     road sites from a JSON file (``ptype ingest --sites``)
"""

from __future__ import annotations

from ptype.ingest.pipeline import (
    DEFAULT_SOURCE,
    HOLD_ENV,
    claim_file,
    evaluate_sites,
    file_key,
    ingest_file,
    model_runs,
)

__all__ = ["DEFAULT_SOURCE", "HOLD_ENV", "claim_file", "evaluate_sites", "file_key",
           "ingest_file", "model_runs"]
