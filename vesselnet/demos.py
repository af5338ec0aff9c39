"""The bundled demo networks, found as package data.

Examples
--------
>>> "whole_body" in demo_names()
True
"""

from __future__ import annotations

from importlib import resources
from pathlib import Path

DEMOS = ("whole_body", "leg", "collateral", "venous_return")
"""The demo networks `vesselnet demo` solves, in order."""


def demo_folder() -> Path:
    """Folder holding the demo files (inside the installed package)."""
    return Path(str(resources.files("vesselnet.networks")))


def demo_names(kind: str | None = "network") -> tuple[str, ...]:
    """Names of the bundled files (without ``.yaml``) of ``kind``, sorted.

    ``kind`` is ``network`` (the default), ``scenario`` or ``plan``
    (:mod:`vesselnet.filekind`), or None for every file.
    """
    from .filekind import file_kind_of

    return tuple(sorted(p.stem for p in demo_folder().glob("*.yaml")
                        if kind is None or file_kind_of(p) == kind))


def demo_path(name: str) -> Path:
    """Path of the bundled file ``name`` (``.yaml`` optional).

    Raises
    ------
    FileNotFoundError
        No such demo.
    """
    path = demo_folder() / (name if name.endswith(".yaml") else name + ".yaml")
    if not path.is_file():
        raise FileNotFoundError(f"no bundled network '{name}'; bundled: {', '.join(demo_names())}")
    return path
