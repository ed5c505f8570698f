"""Bench planner benchmark: N batteries on 40 channels scheduled and the documents written.

Run on its own: ``python tests/benchmarks/bench_bench.py [--sizes 50 500 5000]``. Target
(issue: bench): 500 batteries on 40 channels, scheduled with documents, under 3 s; the growth
shown at 50 / 500 / 5,000.
"""

from __future__ import annotations

import argparse
import time


def _bench(n: int, channels: int = 40):
    import numpy as np

    from chargeplan.model.bench import BenchFile

    rng = np.random.default_rng(5)
    chems = ["flooded", "agm", "gel", "lifepo4", "nmc"]
    batteries = []
    for i in range(n):
        chem = chems[i % 5]
        size = {"cells_in_series": 3} if chem == "nmc" else {"nominal_voltage": "12 V"}
        batteries.append({"id": f"b{i}", "chemistry": chem, **size,
                          "capacity": f"{rng.integers(5, 120)} Ah",
                          "state_of_charge": f"{rng.integers(10, 90)} %",
                          "temperature": f"{rng.integers(10, 30)} degC"})
    kinds = [
        {"max_voltage": "16 V", "max_current": "10 A", "min_current": "0.2 A",
         "temperature_probe": True, "can_disable_high_voltage_stages": True},
        {"max_voltage": "16 V", "max_current": "25 A", "min_current": "0.5 A",
         "temperature_probe": True, "can_disable_high_voltage_stages": True,
         "lithium_mode": True, "unattended": True, "loads_files": True},
        {"max_voltage": "15 V", "max_current": "5 A", "temperature_probe": False,
         "can_disable_high_voltage_stages": False, "unattended": True},
    ]
    return BenchFile.model_validate({
        "room": {"volume": "200 m3", "airflow": "30 m3/h", "opening_area": "500 cm2"},
        "mains_budget": "12000 W", "hours": {"start": "07:00", "end": "19:00"},
        "channels": [{"name": f"ch{c}", **kinds[c % 3]} for c in range(channels)],
        "batteries": batteries})


def measure(n: int) -> dict[str, float]:
    """Seconds to schedule ``n`` batteries on 40 channels and to write the documents."""
    from chargeplan.planners.bench import plan_bench
    from chargeplan.render.bench_docs import bench_document, setpoint_files

    bench = _bench(n)
    start = time.perf_counter()
    plan = plan_bench(bench)
    planned = time.perf_counter()
    bench_document(plan)
    bench_document(plan, html=True)
    setpoint_files(plan)
    return {"plan_s": planned - start, "documents_s": time.perf_counter() - planned,
            "scheduled": len(plan.jobs)}


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", type=int, nargs="+", default=[50, 500, 5000])
    args = parser.parse_args()
    print(f"{'batteries':>10} {'plan s':>8} {'documents s':>12} {'scheduled':>10}")
    for n in args.sizes:
        r = measure(n)
        print(f"{n:>10} {r['plan_s']:8.2f} {r['documents_s']:12.2f} {r['scheduled']:>10}")
    print("target: 500 batteries on 40 channels with documents under 3 s")


if __name__ == "__main__":
    main()
