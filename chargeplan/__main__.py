"""The console entry point (``chargeplan`` and ``python -m chargeplan``).

Start-up and shut-down are most of a short command's time, so before the command line is
even imported:

- the cyclic garbage collector is held back while the command runs;
- pydantic is told not to look for plugins: a plugin would watch the validation of the
  user's files, which this closed tool does not want, and the search reads the metadata
  of every installed package (typer does the same while it builds its own validators);
- numpy's OpenBLAS is asked for one thread. chargeplan's numeric work is element-wise
  (batteries in arrays), which BLAS threads do not speed up; starting a pool of them at
  ``import numpy`` costs every command time and, on a small machine, a core;
- numpy is asked not to advise transparent huge pages for its large arrays
  (``NUMPY_MADVISE_HUGEPAGE=0``, numpy's "Global state" page). Where the kernel honours
  that advice by compacting memory on the spot (``transparent_hugepage/defrag`` set to
  ``madvise``, a common default), the storage planner's season arrays spent more time in
  the kernel than in numpy: at 100,000 batteries the plan's system time fell from 0.8 s
  to 0.2 s without it (tests/benchmarks/bench_storage.py).

A value the user has set for ``PYDANTIC_DISABLE_PLUGINS``, ``OPENBLAS_NUM_THREADS`` or
``NUMPY_MADVISE_HUGEPAGE`` is kept, and the library (``import chargeplan``) changes none.

When the command has finished, the process leaves without the interpreter's teardown of
every module (a twentieth of a short command's time). Nothing is lost by that: every
file a command writes is complete, synced and renamed into place before the command
returns (chargeplan.render.write), and standard output and error are flushed here. The
interpreter's normal way out is kept when a tracer, profiler or coverage tool is
watching (it writes its results at exit), and for any exception other than the
command's own exit.

tests/benchmarks/bench_startup.py measures all of this.
"""

from __future__ import annotations

import gc
import os
import sys
from typing import NoReturn


def run() -> None:
    gc.set_threshold(50_000, 20, 100)
    os.environ.setdefault("PYDANTIC_DISABLE_PLUGINS", "__all__")
    os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
    os.environ.setdefault("NUMPY_MADVISE_HUGEPAGE", "0")
    try:
        from chargeplan.cli import main

        main()
    except SystemExit as stop:
        if _watched():
            raise
        _leave(stop.code)


def _watched() -> bool:
    """A tracer, profiler or coverage tool is running and must see the normal exit."""
    if sys.gettrace() is not None or sys.getprofile() is not None:
        return True
    monitoring = getattr(sys, "monitoring", None)  # Python 3.12+
    return monitoring is not None and any(
        monitoring.get_tool(tool) is not None for tool in range(6)
    )


def _leave(code: object) -> NoReturn:
    """Flush standard output and error, then end the process with ``sys.exit``'s status
    for ``code`` (None: 0; an int: itself; anything else: printed, then 1).

    A reader that closed the pipe (``| head``) is not an error. Any other failure to write
    the output is: one line on stderr and exit 3, as the command itself would report it.
    """
    status = 0 if code is None else code if isinstance(code, int) else 1
    try:
        if not isinstance(code, int | None):
            print(code, file=sys.stderr)
        for stream in (sys.stdout, sys.stderr):
            if stream is not None:
                stream.flush()
    except BrokenPipeError:
        pass
    except (OSError, ValueError) as error:
        try:
            os.write(2, f"internal error: could not write the output ({error})\n".encode())
        except OSError:
            pass
        status = 3
    os._exit(status)


if __name__ == "__main__":
    run()
