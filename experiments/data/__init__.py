"""Package data: the built-in invented demo building."""
from __future__ import annotations

from importlib import resources


def demo_building_path():
    """The input file of the invented demo building (Larkspur Exchange)."""
    return resources.files(__name__) / "demo_building.toml"
