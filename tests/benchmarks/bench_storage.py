"""Storage planner benchmark: N batteries over a 270-day season, and writing its files.

Run on its own: ``python tests/benchmarks/bench_storage.py [--sizes 1000 10000 100000]``.
Targets (issue: storage): 100,000 batteries under 5 s and 1.5 GB peak, near-linear growth;
the schedule CSV and calendar for 10,000 batteries under 10 s. Each size runs in a fresh
process so its peak memory is its own.
"""

from __future__ import annotations

import argparse
import datetime as dt
import json
import subprocess
import sys
import time


def _site(n: int):
    import numpy as np

    from chargeplan.model.storage import SiteFile

    rng = np.random.default_rng(3)
    chems = ["flooded", "agm", "gel", "lifepo4", "nmc"]
    inventory = []
    for i in range(n):
        chem = chems[i % 5]
        size = {"cells_in_series": 3} if chem == "nmc" else {"nominal_voltage": "12 V"}
        inventory.append({"id": f"U{i}", "chemistry": chem, **size,
                          "capacity": f"{rng.uniform(5, 200):.0f} Ah",
                          "state_of_charge": f"{rng.uniform(30, 100):.0f} %",
                          "bay": ["north", "south", "heated"][i % 3]})
    months = [(10, 9, 1), (11, 4, -5), (12, 0, -12), (1, -2, -18), (2, -1, -15), (3, 3, -7),
              (4, 8, 0), (5, 12, 4), (6, 16, 8), (7, 18, 10)]
    return SiteFile.model_validate({
        "site": {"name": "Benchmark depot", "start": dt.date(2026, 10, 1), "duration": "270 d",
                 "round_interval": "14 d", "policy": "maintainer", "warm_room": "heated"},
        "monthly": [{"month": m, "mean": f"{a} degC", "min": f"{b} degC"} for m, a, b in months],
        "bays": [{"name": "north"}, {"name": "south", "mains": True},
                 {"name": "heated", "mains": True, "lithium_maintainer": True, "offset": "+15 K"}],
        "inventory": inventory,
    })


def child(n: int, write: bool) -> None:
    import resource

    from chargeplan.errors import InputError
    from chargeplan.planners.storage import plan_storage
    from chargeplan.render.storage_docs import calendar_ics, schedule_csv

    site = _site(n)
    start = time.perf_counter()
    try:
        plan = plan_storage(site)
    except InputError as error:  # too large for the memory limit: refused before any work
        print(json.dumps({"n": n, "refused": str(error), "plan_s": time.perf_counter() - start,
                          "peak_mb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024}))
        return
    planned = time.perf_counter()
    written = planned
    if write:
        schedule_csv(plan)
        calendar_ics(plan)
        written = time.perf_counter()
    print(json.dumps({"n": n, "plan_s": planned - start, "write_s": written - planned,
                      "top_ups": len(plan.top_ups),
                      "peak_mb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024}))


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", type=int, nargs="+", default=[1000, 10000, 100000])
    parser.add_argument("--child", type=int, help=argparse.SUPPRESS)
    parser.add_argument("--write", action="store_true", help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.child:
        child(args.child, args.write)
        return
    print(f"{'batteries':>10} {'plan s':>8} {'us/battery':>11} {'top-ups':>8} {'peak MB':>8}")
    for n in args.sizes:
        out = subprocess.run([sys.executable, __file__, "--child", str(n)], check=True,
                             capture_output=True, text=True).stdout
        r = json.loads(out)
        if "refused" in r:
            print(f"{n:>10} refused after {r['plan_s']:.2f} s, peak {r['peak_mb']:.0f} MB "
                  f"(the inventory itself): {r['refused']}")
            continue
        print(f"{n:>10} {r['plan_s']:8.2f} {r['plan_s'] / n * 1e6:11.1f} {r['top_ups']:>8} "
              f"{r['peak_mb']:8.0f}")
    out = subprocess.run([sys.executable, __file__, "--child", "10000", "--write"], check=True,
                         capture_output=True, text=True).stdout
    print(f"writing schedule.csv and calendar.ics for 10,000: {json.loads(out)['write_s']:.2f} s")
    print("targets: 100,000 under 5 s and 1.5 GB; writing for 10,000 under 10 s")


if __name__ == "__main__":
    main()
