"""Storage planner benchmark: N batteries over a 270-day season, and writing its files.

Run on its own: ``python tests/benchmarks/bench_storage.py [--sizes 1000 10000 100000]``;
``--end-to-end 100000 [--repeat 3]`` times the command line itself over 181 days (read the
CSV, plan, write every file), and each phase of it in process.
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


SITE_181 = """site: {name: Benchmark depot, start: 2026-10-15, duration: 181 d,
  round_interval: 14 d,
  policy: maintainer, warm_room: heated}
monthly:
  - {month: 10, mean: 9 degC, min: 1 degC}
  - {month: 11, mean: 4 degC, min: -5 degC}
  - {month: 12, mean: 0 degC, min: -12 degC}
  - {month: 1, mean: -2 degC, min: -28 degC}
  - {month: 2, mean: -1 degC, min: -15 degC}
  - {month: 3, mean: 3 degC, min: -7 degC}
  - {month: 4, mean: 8 degC, min: 0 degC}
bays:
  - {name: north}
  - {name: south, mains: true}
  - {name: east, mains: true, offset: -3 K}
  - {name: heated, mains: true, offset: +18 K, airflow: 40 m3/h}
"""


def _inventory_csv(n: int, path) -> None:
    import numpy as np

    rng = np.random.default_rng(3)
    chems = ["flooded", "agm", "gel", "lifepo4", "nmc"]
    bays = ["north", "south", "east", "heated"]
    with open(path, "w", encoding="utf-8") as out:
        out.write("id,owner,chemistry,nominal_voltage,cells_in_series,capacity,state_of_charge,"
                  "bay,parasitic_draw\n")
        for i in range(n):
            chem = chems[i % 5]
            size = ",3" if chem == "nmc" else "12 V,"
            draw = "20 mA" if i % 7 == 0 else ""
            out.write(f"U{i},owner {i % 97},{chem},{size},{rng.uniform(5, 200):.0f} Ah,"
                      f"{rng.uniform(15, 100):.0f} %,{bays[i % 4]},{draw}\n")


def end_to_end(n: int, repeat: int) -> None:
    """The command line over 181 days (``repeat`` runs: median and range), the same with
    numpy's huge-page advice on (which the console entry turns off), then its phases one by
    one in process (in the console entry's environment)."""
    import os
    import statistics
    import tempfile
    from pathlib import Path

    folder = Path(tempfile.mkdtemp(prefix="bench-storage-"))
    (folder / "site.yaml").write_text(SITE_181, encoding="utf-8")
    _inventory_csv(n, folder / "inventory.csv")
    command = [sys.executable, "-m", "chargeplan", "storage", str(folder / "site.yaml"),
               "--inventory", str(folder / "inventory.csv"), "-o", str(folder / "out"), "--force"]
    entry = {**os.environ, "NUMPY_MADVISE_HUGEPAGE": os.environ.get("NUMPY_MADVISE_HUGEPAGE",
                                                                      "0")}

    def timed(env: dict[str, str]) -> float:
        start = time.perf_counter()
        subprocess.run(command, check=True, capture_output=True, env=env)
        return time.perf_counter() - start

    runs, advised = [], []
    for _ in range(repeat):  # interleaved, so a busy moment falls on both
        runs.append(timed(entry))
        advised.append(timed({**os.environ, "NUMPY_MADVISE_HUGEPAGE": "1"}))
    sizes = {p.name: p.stat().st_size for p in (folder / "out").iterdir()}
    print(f"{n:,} batteries x 181 d through the CLI: median {statistics.median(runs):.2f} s "
          f"({min(runs):.2f}-{max(runs):.2f} s over {repeat} runs; target 5 s); with numpy's "
          f"huge-page advice on: median {statistics.median(advised):.2f} s; schedule.csv "
          f"{sizes['schedule.csv'] / 1e6:.1f} MB, all files {sum(sizes.values()) / 1e6:.1f} MB")
    out = subprocess.run([sys.executable, __file__, "--phases", str(folder)], check=True,
                         capture_output=True, text=True, env=entry).stdout
    print(out, end="")


def phases(folder: str) -> None:
    from pathlib import Path

    from chargeplan.planners.storage import load_site, plan_storage, read_inventory
    from chargeplan.profiles import ProfileSet
    from chargeplan.render.storage_docs import storage_files

    where = Path(folder)
    t0 = time.perf_counter()
    site = load_site(where / "site.yaml")
    rows = read_inventory(where / "inventory.csv")
    t1 = time.perf_counter()
    profiles = ProfileSet(use_environment=False)
    plan = plan_storage(site, rows, profiles=profiles)
    t2 = time.perf_counter()
    storage_files(plan, profiles)
    t3 = time.perf_counter()
    print(f"  phases in process: read {t1 - t0:.2f} s, plan {t2 - t1:.2f} s "
          f"({len(plan.visits):,} visits), documents {t3 - t2:.2f} s")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", type=int, nargs="+", default=[1000, 10000, 100000])
    parser.add_argument("--child", type=int, help=argparse.SUPPRESS)
    parser.add_argument("--write", action="store_true", help=argparse.SUPPRESS)
    parser.add_argument("--end-to-end", type=int, help="time the CLI for this many batteries")
    parser.add_argument("--repeat", type=int, default=3,
                        help="runs of the command line for --end-to-end (median and range)")
    parser.add_argument("--phases", help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.phases:
        phases(args.phases)
        return
    if args.end_to_end:
        end_to_end(args.end_to_end, args.repeat)
        return
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
