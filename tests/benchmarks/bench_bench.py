"""Bench planner benchmark: N batteries on 40 channels over a working week, the documents and
files written, and a re-plan from progress.

Run on its own: ``python tests/benchmarks/bench_bench.py [--sizes 50 500 5000]``. Targets:
500 batteries on 40 channels over 5 working days (Monday to Friday, 07:00-19:00), scheduled
with documents and files, in at most 3 s; a re-plan (some on charge, some finished, some
faulted) in at most 1 s. Figures are printed, never asserted.
"""

from __future__ import annotations

import argparse
import datetime as dt
import time

MONDAY = dt.date(2026, 12, 7)


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
                          "temperature": f"{rng.integers(10, 30)} degC",
                          "owner": f"bay {i % 17}"})
    kinds = [
        {"max_voltage": "16 V", "max_current": "10 A", "min_current": "0.2 A",
         "temperature_probe": True, "can_disable_high_voltage_stages": True},
        {"max_voltage": "16 V", "max_current": "25 A", "min_current": "0.5 A",
         "temperature_probe": True, "can_disable_high_voltage_stages": True,
         "lithium_mode": True, "unattended": True, "loads_files": True},
        {"max_voltage": "15 V", "max_current": "5 A", "temperature_probe": False,
         "can_disable_high_voltage_stages": False, "unattended": True},
    ]
    week = {day: {"start": "07:00", "end": "19:00"}
            for day in ("monday", "tuesday", "wednesday", "thursday", "friday")}
    return BenchFile.model_validate({
        "room": {"volume": "200 m3", "airflow": "30 m3/h", "opening_area": "500 cm2"},
        "mains_budget": "12000 W", "date": MONDAY.isoformat(),
        "hours": {**week, "saturday": "closed", "sunday": "closed"},
        "channels": [{"name": f"ch{c}", **kinds[c % 3]} for c in range(channels)],
        "batteries": batteries})


def _progress(plan):
    """On Tuesday at 10:00: what started before is on charge, finished or (one in 50) faulted."""
    from chargeplan.model.bench import ProgressRow
    from chargeplan.planners.bench_progress import Progress

    now = dt.datetime.combine(MONDAY + dt.timedelta(days=1), dt.time(10, 0))
    rows = []
    names = [c.name for c in plan.bench.channels]
    for k, job in enumerate(sorted(plan.jobs, key=lambda j: j.start_min)):
        start, end = plan.moment(job.start_min), plan.moment(job.end_min)
        if start >= now:
            break
        b = plan.batteries[job.battery].id
        if k % 50 == 0:
            rows.append(ProgressRow(battery=b, finished="faulted"))
        elif end <= now:
            rows.append(ProgressRow(battery=b, channel=names[job.channel], started=start,
                                    finished=end))
        else:
            rows.append(ProgressRow(battery=b, channel=names[job.channel], started=start))
    return now, Progress(rows=rows)


def measure(n: int) -> dict[str, float]:
    """Seconds to schedule ``n`` batteries, to write the documents and files, to re-plan."""
    from chargeplan.planners.bench import plan_bench, replan_bench
    from chargeplan.render.bench_docs import bench_document, bench_sheets, setpoint_files
    from chargeplan.render.bench_files import schedule_csv, schedule_ics

    bench = _bench(n)
    start = time.perf_counter()
    plan = plan_bench(bench)
    planned = time.perf_counter()
    bench_document(plan)
    bench_document(plan, html=True)
    bench_sheets(plan)
    schedule_csv(plan)
    schedule_ics(plan)
    setpoint_files(plan)
    written = time.perf_counter()
    now, progress = _progress(plan)
    again = time.perf_counter()
    replan = replan_bench(plan, now=now, progress=progress)
    done = time.perf_counter()
    plan_bench(bench, now=now, progress=progress)
    cold = time.perf_counter()
    days = {plan.moment(j.start_min).date() for j in plan.jobs}
    return {"plan_s": planned - start, "documents_s": written - planned,
            "replan_s": done - again, "replan_cold_s": cold - done,
            "scheduled": len(plan.jobs), "days": len(days),
            "unscheduled": len(plan.unscheduled), "replanned_jobs": len(replan.jobs)}


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", type=int, nargs="+", default=[50, 500, 5000])
    args = parser.parse_args()
    print(f"{'batteries':>10} {'plan s':>8} {'docs s':>8} {'re-plan s':>10} "
          f"{'from file s':>12} {'scheduled':>10} {'days':>5} {'left out':>9}")
    for n in args.sizes:
        r = measure(n)
        print(f"{n:>10} {r['plan_s']:8.2f} {r['documents_s']:8.2f} {r['replan_s']:10.2f} "
              f"{r['replan_cold_s']:12.2f} {r['scheduled']:>10} {r['days']:>5} "
              f"{r['unscheduled']:>9}")
    print("targets: 500 batteries on 40 channels over 5 working days, with documents, <= 3 s; "
          "a re-plan <= 1 s (re-plan: reusing the plan's compatibility and estimates, "
          "replan_bench; from file: everything again, as the command line does)")


if __name__ == "__main__":
    main()
