"""The console entry point (``chargeplan`` and ``python -m chargeplan``).

Start-up and shut-down are most of a short command's time, so before the command line is
even imported:

- the cyclic garbage collector is held back while the command runs;
- pydantic is told not to look for plugins: a plugin would watch the validation of the
  user's files, which this closed tool does not want, and the search reads the metadata
  of every installed package (typer does the same while it builds its own validators);
- numpy's OpenBLAS is asked for one thread. chargeplan's numeric work is element-wise
  (batteries in arrays), which BLAS threads do not speed up; starting a pool of them at
  ``import numpy`` costs every command time and, on a small machine, a core.

A value the user has set for ``PYDANTIC_DISABLE_PLUGINS`` or ``OPENBLAS_NUM_THREADS`` is
kept, and the library (``import chargeplan``) changes neither.

When the command has finished, the process leaves without the interpreter's teardown of
every module (a twentieth of a short command's time). Nothing is lost by that: every
file a command writes is complete, synced and renamed into place before the command
returns (chargeplan.render.write), and standard output and error are flushed here. An
exception other than the command's own exit takes the interpreter's normal way out.

tests/benchmarks/bench_startup.py measures all of this.
"""

from __future__ import annotations

import gc
import os
import sys
from typing import NoReturn


def run() -> NoReturn:
    gc.set_threshold(50_000, 20, 100)
    os.environ.setdefault("PYDANTIC_DISABLE_PLUGINS", "__all__")
    os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
    code: object = 0
    try:
        from chargeplan.cli import main

        main()
    except SystemExit as stop:
        code = stop.code
    _leave(code)


def _leave(code: object) -> NoReturn:
    """Flush standard output and error, then end the process with ``sys.exit``'s status
    for ``code`` (None: 0; an int: itself; anything else: printed, then 1)."""
    status = 0 if code is None else code if isinstance(code, int) else 1
    streams = (sys.stdout, sys.stderr)
    if not isinstance(code, int | None) and sys.stderr is not None:
        print(code, file=sys.stderr)
    for stream in streams:
        try:
            if stream is not None:
                stream.flush()
        except (OSError, ValueError):  # a reader that closed the pipe (| head)
            pass
    os._exit(status)


if __name__ == "__main__":
    run()
