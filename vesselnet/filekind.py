"""Which kind of vesselnet file a document is, told by its top-level keys.

Examples
--------
>>> file_kind({"vesselnet": 1, "network": "leg.yaml", "scenarios": []})
'scenario'
>>> file_kind({"vesselnet": 1, "vessels": []})
'network'
"""

from __future__ import annotations

KIND_KEYS = (("scenarios", "scenario"), ("candidates", "plan"), ("uncertainty", "uncertainty"),
             ("parameters", "sweep"), ("cases", "sweep"), ("shares", "targets"),
             ("pressures", "targets"), ("flows", "targets"))
"""A top-level key and the file kind it marks; anything else is a network file."""


def file_kind(doc) -> str:
    """``scenario``, ``plan``, ``uncertainty``, ``sweep``, ``targets`` or ``network``."""
    if isinstance(doc, dict):
        for key, kind in KIND_KEYS:
            if key in doc:
                return kind
    return "network"


def file_kind_of(path) -> str:
    """:func:`file_kind` of the file at ``path`` (``network`` when it cannot be parsed:
    the network reader then reports why)."""
    from .errors import NetworkSpecError
    from .yamlread import load_file

    try:
        return file_kind(load_file(path))
    except NetworkSpecError:
        return "network"
