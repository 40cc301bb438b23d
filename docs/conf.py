"""Sphinx configuration of the ptype reference manual (``make docs``).

The manual is the Markdown guides of this folder (read with MyST), the tutorial from the
README, an API reference generated from the public docstrings (autodoc and autosummary,
numpydoc sections) and the HTTP API rendered from the service's own OpenAPI document at
build time (``_ext/ptype_openapi.py``).  The build runs with warnings as errors.
"""

from __future__ import annotations

import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE / "_ext"))

import ptype  # the package documented (installed, or on PYTHONPATH)

project = "ptype"
author = "The ptype developers"
copyright = "the ptype developers; Apache License 2.0"
release = ptype.__version__
version = ".".join(release.split(".")[:2])

extensions = [
    "sphinx.ext.autodoc",
    "sphinx.ext.autosummary",
    "sphinx.ext.mathjax",
    "numpydoc",
    "myst_parser",
    "ptype_openapi",
    "ptype_guides",
]

source_suffix = {".rst": "restructuredtext", ".md": "markdown"}
root_doc = "index"
exclude_patterns = ["_build", "Thumbs.db", ".DS_Store"]
templates_path = ["_templates"]

# Markdown: heading anchors so that links like formats.md#csv resolve, and $...$ maths.
myst_heading_anchors = 3
myst_enable_extensions = ["dollarmath", "colon_fence"]

# API reference: one page per module from the autosummary tables, members in source order.
autosummary_generate = True
autosummary_imported_members = False
autodoc_member_order = "bysource"
autodoc_typehints = "none"  # numpydoc sections state the types
autodoc_default_options = {"members": True, "show-inheritance": False}
numpydoc_show_class_members = False
numpydoc_validation_checks: set[str] = set()
numpydoc_xref_param_type = False

# The pages carry the caution in their footer (see _templates/layout.html).
html_theme = "alabaster"
html_title = f"ptype {release} manual"
html_static_path: list[str] = []
html_context = {"caution": ptype.CAUTION}
html_theme_options = {"description": "Precipitation type at the ground, explained.",
                      "show_powered_by": False}
html_show_sourcelink = False

# The guides' JSON examples shorten arrays with "..." and one block is CSV: Pygments then
# falls back to plain text, which is what they should look like anyway.
suppress_warnings = ["misc.highlighting_failure"]
