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


def demo_names() -> tuple[str, ...]:
    """Names of every bundled network file (without ``.yaml``), sorted."""
    return tuple(sorted(p.stem for p in demo_folder().glob("*.yaml")))


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
