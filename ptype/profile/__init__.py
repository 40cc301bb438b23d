"""The vertical profile: its JSON document, the checks on its levels, and the validated
:class:`Profile` every reader returns and every kernel starts from.

==================  ===========================================================
module              what it holds
==================  ===========================================================
:mod:`.document`    the JSON profile document (pydantic): structure and types
:mod:`.levels`      the stages from level mappings to checked arrays: columns, physical
                    checks, humidity conversion, order, hypsometric heights
:mod:`.model`       :class:`Profile`, built by running those stages
==================  ===========================================================
"""

from __future__ import annotations

from ptype.profile.document import ProfileDocument, Site, Surface, parse_document
from ptype.profile.model import HUMIDITY_FIELDS, LEVEL_FIELDS, MIN_LEVELS, Profile

__all__ = ["HUMIDITY_FIELDS", "LEVEL_FIELDS", "MIN_LEVELS", "Profile", "ProfileDocument", "Site",
           "Surface", "parse_document"]
