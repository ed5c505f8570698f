"""Cold-start benchmark: `chargeplan plan FILE --format json` and `chargeplan --help`
against `python -c "import pint, pydantic, typer"` on the same machine.

Run on its own: ``python tests/benchmarks/bench_startup.py [--runs 21]``. Targets
(issue: core planner; hardening): plan within 1.3x, --help within 1.2x of the
baseline. Byte-code is compiled first (as an installed package is), and runs of
the three commands are interleaved so machine noise hits them alike.
"""

from __future__ import annotations

import argparse
import compileall
import os
import statistics
import subprocess
import sys
import time
from pathlib import Path

import chargeplan

EXAMPLE = Path(chargeplan.example_paths()[1])


def _time(command: list[str], env: dict[str, str]) -> float:
    start = time.perf_counter()
    subprocess.run(command, check=True, stdout=subprocess.DEVNULL, env=env)
    return time.perf_counter() - start


def measure(runs: int = 21) -> dict[str, float]:
    compileall.compile_dir(str(Path(chargeplan.__file__).parent), quiet=1)
    env = {k: v for k, v in os.environ.items() if k != "PYTHONDONTWRITEBYTECODE"}
    cli = [sys.executable, "-m", "chargeplan"]
    commands = {
        "baseline": [sys.executable, "-c", "import pint, pydantic, typer"],
        # `import pydantic` defers pydantic's core until a model is defined; this second
        # baseline includes it, to show how much of the gap is pydantic's own start-up.
        "baseline_model": [sys.executable, "-c", "import pint, pydantic, typer\n"
                           "class M(pydantic.BaseModel):\n    x: int = 0"],
        "plan_json": [*cli, "plan", str(EXAMPLE), "--format", "json"],
        "help": [*cli, "--help"],
    }
    for command in commands.values():  # warm the file cache
        _time(command, env)
    samples: dict[str, list[float]] = {name: [] for name in commands}
    for _ in range(runs):
        for name, command in commands.items():
            samples[name].append(_time(command, env))
    medians = {name: statistics.median(values) for name, values in samples.items()}
    # the ratio within each round (same moment, same machine load), then its median
    for name in commands:
        ratios = [t / b for t, b in zip(samples[name], samples["baseline"], strict=True)]
        medians[f"{name}_ratio"] = statistics.median(ratios)
    return medians


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--runs", type=int, default=21)
    args = parser.parse_args()
    medians = measure(args.runs)
    base = medians["baseline"]
    print(f"{'command':<34} {'median s':>9} {'x baseline':>11} {'target':>7}")
    print("(x baseline: the median of the per-round ratios; rounds interleave the commands)")
    print(f"{'python -c import pint,pydantic,typer':<34} {base:9.3f} {1.0:11.2f}")
    model = medians["baseline_model"]
    print(f"{'  ... and define one BaseModel':<34} {model:9.3f} "
          f"{medians['baseline_model_ratio']:11.2f}")
    for name, label, target in (("plan_json", "chargeplan plan FILE --format json", 1.3),
                                ("help", "chargeplan --help", 1.2)):
        ratio = medians[f"{name}_ratio"]
        print(f"{label:<34} {medians[name]:9.3f} {ratio:11.2f} {target:7.1f}")


if __name__ == "__main__":
    main()
