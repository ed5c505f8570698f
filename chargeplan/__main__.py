"""The console entry point (``chargeplan`` and ``python -m chargeplan``).

Start-up is most of a short command's time, so before the command line is even imported:

- the cyclic garbage collector is held back while the command runs, and its objects are
  frozen before exit, so the interpreter does not sweep every module's objects on the way
  out or while importing them;
- pydantic is told not to look for plugins: a plugin would watch the validation of the
  user's files, which this closed tool does not want, and the search reads the metadata
  of every installed package (typer does the same while it builds its own validators).
- numpy's OpenBLAS is asked for one thread. chargeplan's numeric work is element-wise
  (batteries in arrays), which BLAS threads do not speed up; starting a pool of them at
  ``import numpy`` costs every command time and, on a small machine, a core.

A value the user has set for ``PYDANTIC_DISABLE_PLUGINS`` or ``OPENBLAS_NUM_THREADS`` is
kept, and the library (``import chargeplan``) changes neither.

tests/benchmarks/bench_startup.py measures the effect.
"""

from __future__ import annotations


def run() -> None:
    import gc
    import os

    gc.set_threshold(50_000, 20, 100)
    os.environ.setdefault("PYDANTIC_DISABLE_PLUGINS", "__all__")
    os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
    try:
        from chargeplan.cli import main

        main()
    finally:
        gc.freeze()


if __name__ == "__main__":
    run()
