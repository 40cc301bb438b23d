"""Sphinx extension: a guide added to ``docs/`` is in the manual without editing the index.

The index lists the guides in reading order; its "Guides" table of contents ends with the
placeholder line ``ptype-more-guides``, which this extension replaces (when the index is
read) with every top-level page of the folder that the index does not name yet, sorted.
"""

from __future__ import annotations

#: The line of ``index.rst`` replaced by the pages it does not name.
PLACEHOLDER = "ptype-more-guides"


def unlisted_pages(found_docs: set[str], index_text: str) -> list[str]:
    """Top-level pages (no folder) that the index neither names nor is."""
    named = {line.strip() for line in index_text.splitlines()}
    return sorted(d for d in found_docs if "/" not in d and d != "index" and d not in named)


def _on_source_read(app, docname: str, source: list[str]) -> None:
    if docname != "index" or PLACEHOLDER not in source[0]:
        return
    text = source[0]
    indent = next(line[: len(line) - len(line.lstrip())] for line in text.splitlines()
                  if line.strip() == PLACEHOLDER)
    extra = "\n".join(indent + name for name in unlisted_pages(app.env.found_docs, text))
    source[0] = text.replace(indent + PLACEHOLDER, extra)


def setup(app) -> dict:
    app.connect("source-read", _on_source_read)
    return {"version": "1", "parallel_read_safe": True, "parallel_write_safe": True}
