"""Charge simulation benchmark: full plans for N different batteries simulated together.

Run on its own: ``python tests/benchmarks/bench_simulate.py [--sizes 1000 10000 100000]``.
Targets (issue: physics): 10,000 batteries under 3 s and under 500 MB peak; growth close to
linear; one battery under 20 ms. Each size runs in a fresh process so its peak memory
(maximum resident set) is its own; planning the batteries is timed apart from simulating.
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
import time


def _batteries(n: int, seed: int = 7) -> list[dict]:
    import numpy as np

    rng = np.random.default_rng(seed)
    chemistries = [("flooded", {"nominal_voltage": "12 V"}), ("agm", {"nominal_voltage": "12 V"}),
                   ("gel", {"nominal_voltage": "12 V"}), ("lifepo4", {"nominal_voltage": "12 V"}),
                   ("nmc", {"cells_in_series": 3})]
    out = []
    for i in range(n):
        chemistry, size = chemistries[i % len(chemistries)]
        hot = i % 100 == 0  # one in a hundred at the hot edge, where stages may time out
        lead = chemistry in ("flooded", "agm", "gel")
        out.append({
            "battery": {"name": f"unit {i}", "chemistry": chemistry, **size,
                        "capacity": f"{rng.uniform(5, 200):.1f} Ah"},
            "state": {"state_of_charge": f"{rng.uniform(0, 100):.0f} %"},
            "conditions": {"battery_temperature":
                           f"{(49.5 if lead else 44.5) if hot else rng.uniform(0, 40):.1f} degC"},
        })
    return out


def child(n: int) -> None:
    import resource

    from chargeplan.engine.planner import plan_charge
    from chargeplan.estimate import estimate_plans
    from chargeplan.model.battery import BatteryFile

    data = _batteries(n)
    start = time.perf_counter()
    plans = [plan_charge(BatteryFile.model_validate(d)) for d in data]
    planned = time.perf_counter()
    estimate_plans(plans)
    simulated = time.perf_counter()
    peak_mb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(json.dumps({"n": n, "plan_s": planned - start, "simulate_s": simulated - planned,
                      "peak_mb": peak_mb}))


def one_battery(repeat: int = 30) -> float:
    import statistics

    from chargeplan.engine.planner import plan_charge
    from chargeplan.estimate import estimate_plans
    from chargeplan.model.battery import BatteryFile

    battery_file = BatteryFile.model_validate(_batteries(2)[1])
    times = []
    for _ in range(repeat):
        plan = plan_charge(battery_file)
        start = time.perf_counter()
        estimate_plans([plan])
        times.append(time.perf_counter() - start)
    return statistics.median(times)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", type=int, nargs="+", default=[1000, 10000, 100000])
    parser.add_argument("--child", type=int, help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.child:
        child(args.child)
        return
    print(f"one battery, simulated in process: median {one_battery() * 1000:.1f} ms "
          "(target < 20 ms)")
    print(f"{'batteries':>10} {'plan s':>8} {'simulate s':>11} {'us/battery':>11} {'peak MB':>8}")
    for n in args.sizes:
        out = subprocess.run([sys.executable, __file__, "--child", str(n)], check=True,
                             capture_output=True, text=True).stdout
        r = json.loads(out)
        print(f"{n:>10} {r['plan_s']:8.2f} {r['simulate_s']:11.2f} "
              f"{r['simulate_s'] / n * 1e6:11.1f} {r['peak_mb']:8.0f}")
    print("targets: 10,000 batteries simulated under 3 s and 500 MB; near-linear growth")


if __name__ == "__main__":
    main()
