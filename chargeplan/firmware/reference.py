"""The reference implementation in portable C99, shipped as package data (``firmware/c/``).

:func:`reference_files` gives its files: the sources, the ``Makefile`` and the host test,
and ``cp_faults.h``, written here from the one fault table
(:mod:`chargeplan.firmware.faults`) so the C codes can never drift from it. With an image,
``setpoints.bin`` comes along, and ``make test`` runs the host test on it.
"""

from __future__ import annotations

from importlib import resources
from pathlib import Path

from chargeplan.firmware.faults import FAULTS

__all__ = ["SOURCES", "faults_header", "reference_files", "write_reference"]

#: The shipped files, in ``chargeplan/firmware/c/``.
SOURCES = ("cp_program.h", "cp_image.c", "cp_step.c", "test_host.c", "Makefile")


def faults_header() -> str:
    """``cp_faults.h``: one ``#define`` per fault code of the table."""
    lines = ["/* chargeplan fault codes, written from chargeplan/firmware/faults.py; do not",
             " * edit by hand. 0 is no fault. latch: stop until reset; pause: resume by",
             " * itself once the cause has cleared by the program's hysteresis. */",
             "#ifndef CP_FAULTS_H", "#define CP_FAULTS_H", ""]
    for fault in FAULTS:
        lines.append(f"#define CPR_FAULT_{fault.name.upper()} {fault.code}u /* {fault.action} */")
    lines += ["", "#endif /* CP_FAULTS_H */", ""]
    return "\n".join(lines)


def reference_files(image: bytes | None = None) -> dict[str, str | bytes]:
    """File name -> contents of the reference implementation (and ``setpoints.bin``)."""
    folder = resources.files("chargeplan.firmware").joinpath("c")
    files: dict[str, str | bytes] = {
        name: folder.joinpath(name).read_text(encoding="utf-8") for name in SOURCES}
    files["cp_faults.h"] = faults_header()
    if image is not None:
        files["setpoints.bin"] = image
    return files


def write_reference(folder: str | Path, *, image: bytes | None = None,
                    force: bool = False) -> list[str]:
    """Write the reference implementation into ``folder`` (nothing is written if any target
    exists without ``force``); the names written."""
    from chargeplan.render.write import write_all

    files = reference_files(image)
    write_all(folder, files, force=force)
    return sorted(files)
