"""Storage intake benchmark: reading an inventory CSV of N batteries, and resolving it.

Run on its own: ``python tests/benchmarks/bench_inventory.py [--size 100000] [--runs 7]``.
Times ``read_inventory`` (the CSV read into a validated table, column by column:
chargeplan/csvcolumns.py) and ``resolve_fleet`` (the rows
resolved into the planner's per-battery arrays, the first step of ``plan_storage``) on the
inventory bench_storage.py's ``--end-to-end`` writes, best of ``--runs`` in one process:
once with Python's own garbage-collector thresholds (the library in someone's program), once
with the thresholds the command line sets (chargeplan/__main__.py), as the end-to-end run
has them. Targets (issue: storage, 100,000 batteries end to end under 5 s): read under
0.6 s and resolve under 0.25 s for 100,000 batteries.
"""

from __future__ import annotations

import argparse
import gc
import json
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

#: The collector's thresholds chargeplan/__main__.py sets for a command (kept in step by hand).
CLI_GC_THRESHOLDS = (50_000, 20, 100)


def measure(n: int, runs: int, thresholds: tuple[int, ...] | None = None) -> dict[str, float]:
    import bench_storage

    from chargeplan.planners.storage import load_site, read_inventory
    from chargeplan.planners.storage_intake import resolve_fleet
    from chargeplan.profiles import ProfileSet

    folder = Path(tempfile.mkdtemp(prefix="bench-inventory-"))
    (folder / "site.yaml").write_text(bench_storage.SITE_181, encoding="utf-8")
    bench_storage._inventory_csv(n, folder / "inventory.csv")
    site = load_site(folder / "site.yaml")
    profiles = ProfileSet(use_environment=False)
    read_s, resolve_s = [], []
    before = gc.get_threshold()
    if thresholds is not None:
        gc.set_threshold(*thresholds)
    for _ in range(runs):
        gc.collect()  # each run starts from the same heap: the last run's rows are gone
        start = time.perf_counter()
        rows = read_inventory(folder / "inventory.csv")
        read = time.perf_counter()
        fleet = resolve_fleet(site, rows, profiles, "inventory.csv")
        done = time.perf_counter()
        read_s.append(read - start)
        resolve_s.append(done - read)
        assert fleet.n == n
        del rows, fleet
    gc.set_threshold(*before)
    return {"n": n, "read_s": min(read_s), "resolve_s": min(resolve_s)}


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--size", type=int, default=100000)
    parser.add_argument("--runs", type=int, default=7)
    parser.add_argument("--json", action="store_true", help="one JSON line of the figures")
    args = parser.parse_args()
    library = measure(args.size, args.runs)
    command = measure(args.size, args.runs, CLI_GC_THRESHOLDS)
    if args.json:
        print(json.dumps({"library": library, "command_line": command}))
        return
    print(f"{args.size:,} batteries, best of {args.runs} (targets at 100,000: read 0.6 s, "
          "resolve 0.25 s)")
    for what, r in (("library, Python's collector", library),
                    ("as the command line runs it", command)):
        print(f"  {what}: read_inventory {r['read_s']:.3f} s, resolve_fleet "
              f"{r['resolve_s']:.3f} s")


if __name__ == "__main__":
    main()
