"""A re-plan's progress: which batteries are on charge, finished or faulted.

``progress.csv`` has the columns ``battery, channel, started, finished`` (local wall-clock
date-times, no offset); ``finished`` is ``faulted`` for a charge that stopped with a fault.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING

from chargeplan.errors import InputError
from chargeplan.model.bench import BenchBattery, BenchChannel, ProgressRow

if TYPE_CHECKING:
    from chargeplan.planners.bench_calendar import WorkCalendar
    from chargeplan.planners.bench_intake import Option
    from chargeplan.planners.bench_schedule import Job

__all__ = ["Progress", "read_progress"]


@dataclass
class Progress:
    rows: list[ProgressRow] = field(default_factory=list)
    file: str = "progress.csv"
    finished: list[int] = field(default_factory=list)
    faulted: list[int] = field(default_factory=list)
    on_charge: list[int] = field(default_factory=list)

    def apply(self, batteries: list[BenchBattery], channels: list[BenchChannel],
              options: dict[tuple[int, int], Option], calendar: WorkCalendar,
              now_min: float | None = None) -> tuple[list[Job], set[int]]:
        """The jobs on charge (fixed) and the batteries taken off the schedule."""
        from chargeplan.planners.bench_schedule import Job

        index = {b.id: i for i, b in enumerate(batteries)}
        names = {c.name: k for k, c in enumerate(channels)}
        fixed: list[Job] = []
        dropped: set[int] = set()
        for n, row in enumerate(self.rows, 2):
            where = f"{self.file}: line {n}"
            if row.battery not in index:
                raise InputError(f"battery '{row.battery}' is not on the bench", file=where,
                                 field="battery", fix="add it to the bench file, or fix the id")
            i = index[row.battery]
            if i in dropped:
                raise InputError(f"battery '{row.battery}' is listed twice", file=where,
                                 field="battery", fix="keep one row a battery")
            if row.finished is not None:
                (self.faulted if row.finished == "faulted" else self.finished).append(i)
                dropped.add(i)
                continue
            if row.started is None:
                continue
            if row.channel not in names:
                raise InputError(f"no channel named '{row.channel}'", file=where,
                                 field="channel", fix="name the channel it is on, as in the "
                                 "bench file")
            c = names[row.channel]
            if (i, c) not in options:
                raise InputError(f"battery '{row.battery}' is on channel '{row.channel}', which "
                                 "cannot charge it (see the compatibility table)", file=where,
                                 field="channel", fix="stop that charge and move the battery; "
                                 "then clear its started time")
            start = calendar.minutes(row.started)
            end = max(start + options[(i, c)].minutes, now_min if now_min is not None else start)
            o = options[(i, c)]
            fixed.append(Job(i, c, start, end, o.airflow_m3_per_h, o.power_w, on_charge=True))
            self.on_charge.append(i)
            dropped.add(i)
        return fixed, dropped


def read_progress(path: str | Path) -> Progress:
    """``progress.csv`` through the project's CSV readers (chargeplan.csvfile)."""
    from chargeplan.csvfile import read_rows

    return Progress(rows=read_rows(path, ProgressRow), file=str(path))
