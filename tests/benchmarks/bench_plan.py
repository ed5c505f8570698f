"""In-process planning benchmark: one battery, once imported (target: median under 1 ms).

Run on its own: ``python tests/benchmarks/bench_plan.py [--repeat 2000]``. Measures
``plan_charge`` on each bundled example (validated once) and the setpoint encoding.
"""

from __future__ import annotations

import argparse
import statistics
import time

from chargeplan.api import load_battery_file
from chargeplan.demo import example_paths
from chargeplan.engine.planner import plan_charge
from chargeplan.firmware.setpoints import encode


def measure(repeat: int = 2000) -> dict[str, float]:
    files = [load_battery_file(path) for path in example_paths()]
    for battery_file in files:  # warm caches (profiles are read once per process)
        plan_charge(battery_file)
    plan_times, encode_times = [], []
    for index in range(repeat):
        battery_file = files[index % len(files)]
        start = time.perf_counter()
        plan = plan_charge(battery_file)
        middle = time.perf_counter()
        encode(plan)
        end = time.perf_counter()
        plan_times.append(middle - start)
        encode_times.append(end - middle)
    return {
        "plan_median_ms": statistics.median(plan_times) * 1000,
        "plan_p95_ms": statistics.quantiles(plan_times, n=20)[-1] * 1000,
        "encode_median_ms": statistics.median(encode_times) * 1000,
    }


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=2000)
    figures = measure(parser.parse_args().repeat)
    print(f"plan one battery, median   {figures['plan_median_ms']:.3f} ms  (target < 1 ms)")
    print(f"plan one battery, p95      {figures['plan_p95_ms']:.3f} ms")
    print(f"encode setpoints, median   {figures['encode_median_ms']:.3f} ms")


if __name__ == "__main__":
    main()
