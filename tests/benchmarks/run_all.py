"""Run every benchmark the issues ask for and print one table: what, the figure, the target.

Run on its own: ``python tests/benchmarks/run_all.py [--quick]`` (``--quick`` uses smaller
sizes and fewer runs; the targets are for the full sizes). Each heavy case runs in its own
process, so its peak memory is its own. Figures are measured, never asserted in tests.
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))


def _child(script: str, *args: str) -> dict:
    out = subprocess.run([sys.executable, str(HERE / script), *args], check=True,
                         capture_output=True, text=True).stdout
    return json.loads(out.strip().splitlines()[-1])


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true")
    quick = parser.parse_args().quick
    import bench_bench
    import bench_plan
    import bench_simulate
    import bench_startup

    rows: list[tuple[str, str, str]] = []
    start = bench_startup.measure(7 if quick else 21)
    rows.append(("cold start, plan FILE --format json", f"{start['plan_json_ratio']:.2f}x",
                 "<= 1.3x import pint, pydantic, typer"))
    rows.append(("cold start, --help", f"{start['help_ratio']:.2f}x", "<= 1.2x"))
    plan = bench_plan.measure(500 if quick else 2000)
    rows.append(("plan one battery (median)", f"{plan['plan_median_ms']:.3f} ms", "< 1 ms"))
    rows.append(("simulate one battery (median)",
                 f"{bench_simulate.one_battery(10 if quick else 30) * 1000:.1f} ms", "< 20 ms"))
    for n in ([1000, 10000] if quick else [1000, 10000, 100000]):
        r = _child("bench_simulate.py", "--child", str(n))
        target = "< 3 s, < 500 MB" if n == 10000 else "near-linear"
        rows.append((f"simulate {n:,} batteries together",
                     f"{r['simulate_s']:.2f} s, {r['peak_mb']:.0f} MB", target))
    for n in ([1000, 10000] if quick else [1000, 10000, 100000]):
        r = _child("bench_storage.py", "--child", str(n))
        target = "< 5 s, < 1.5 GB" if n == 100000 else "near-linear"
        rows.append((f"storage, {n:,} batteries x 270 d",
                     f"{r['plan_s']:.2f} s, {r['peak_mb']:.0f} MB", target))
    if not quick:  # 1,000,000: completes in memory or refuses up front, never swaps
        r = _child("bench_storage.py", "--child", "1000000")
        figure = (f"refused in {r['plan_s']:.2f} s" if "refused" in r
                  else f"{r['plan_s']:.2f} s, {r['peak_mb']:.0f} MB")
        rows.append(("storage, 1,000,000 batteries x 270 d", figure,
                     "completes in memory or refuses up front"))
    r = _child("bench_storage.py", "--child", "10000", "--write")
    rows.append(("storage CSV + calendar, 10,000 batteries", f"{r['write_s']:.2f} s", "< 10 s"))
    for n in ([50, 500] if quick else [50, 500, 5000]):
        r = bench_bench.measure(n)
        rows.append((f"bench, {n:,} batteries on 40 channels, a week + documents",
                     f"{r['plan_s'] + r['documents_s']:.2f} s",
                     "<= 3 s" if n == 500 else "growth"))
        rows.append((f"bench re-plan, {n:,} batteries (reusing the estimates / from file)",
                     f"{r['replan_s']:.2f} / {r['replan_cold_s']:.2f} s",
                     "<= 1 s" if n == 500 else "growth"))
    width = max(len(r[0]) for r in rows)
    print(f"{'what':<{width}}  {'figure':<22} target")
    for what, figure, target in rows:
        print(f"{what:<{width}}  {figure:<22} {target}")


if __name__ == "__main__":
    main()
