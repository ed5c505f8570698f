"""The bundled examples: a few batteries from an invented small-engine workshop and boat store."""

from __future__ import annotations

from importlib.resources import files
from pathlib import Path

__all__ = ["example_paths"]


def example_paths() -> list[Path]:
    """The bundled example battery files, in the order the demo shows them."""
    folder = Path(str(files("chargeplan") / "examples"))
    return sorted(folder.glob("*.yaml"))
