"""The bundled examples: a few batteries from an invented small-engine workshop and boat store."""

from __future__ import annotations

from importlib.resources import files
from pathlib import Path

__all__ = ["example_paths"]


def example_paths(*, include_storage: bool = False) -> list[Path]:
    """The bundled example battery files, in the order the demo shows them (with
    ``include_storage``, also the storage-site and bench examples)."""
    folder = Path(str(files("chargeplan") / "examples"))
    paths = sorted(folder.glob("*.yaml"))
    if include_storage:
        return paths
    return [p for p in paths if not p.name.startswith(("storage", "bench"))]
