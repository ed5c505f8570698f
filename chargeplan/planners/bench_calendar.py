"""The bench's working calendar: working spans as minutes from the first day's midnight.

Times are the bench's local wall-clock time with no offset, so a day with a clock change
counts its working hours on the wall clock (a charge that runs across the change is shown
on the wall clock too, an hour off in real time).
"""

from __future__ import annotations

import datetime as dt
from bisect import bisect_right
from dataclasses import dataclass

from chargeplan.model.bench import Hours

__all__ = ["DAY_MIN", "HORIZON_DAYS", "WorkCalendar", "work_calendar"]

#: Minutes in a (wall-clock) day.
DAY_MIN = 24 * 60
#: How many days ahead the bench is planned before a battery is reported as not fitting.
HORIZON_DAYS = 28


@dataclass(frozen=True)
class WorkCalendar:
    """Working spans ``[opens[k], closes[k])`` in minutes from ``origin`` (sorted, merged)."""

    origin: dt.datetime
    opens: tuple[float, ...]
    closes: tuple[float, ...]

    def at(self, minutes: float) -> dt.datetime:
        """The wall-clock moment ``minutes`` after the origin (to the minute)."""
        return self.origin + dt.timedelta(minutes=round(minutes))

    def minutes(self, moment: dt.datetime) -> float:
        return (moment - self.origin).total_seconds() / 60.0

    def span_at(self, t: float) -> int | None:
        """The index of the working span that holds ``t``, or None."""
        k = bisect_right(self.opens, t + 1e-9) - 1
        return k if k >= 0 and t < self.closes[k] - 1e-9 else None

    def next_start(self, t: float) -> tuple[float, float] | None:
        """The first working moment at or after ``t``, and the close of its span."""
        k = self.span_at(t)
        if k is not None:
            return t, self.closes[k]
        k = bisect_right(self.opens, t)
        if k >= len(self.opens):
            return None
        return self.opens[k], self.closes[k]

    def openings_after(self, t: float) -> list[float]:
        return list(self.opens[bisect_right(self.opens, t):])

    @property
    def first_open(self) -> float:
        return self.opens[0]

    @property
    def longest_span_min(self) -> float:
        return max(c - o for o, c in zip(self.opens, self.closes, strict=True))

    def after_working(self, start: float, minutes: float) -> float:
        """The moment by which ``minutes`` of working time have passed since ``start``."""
        left = minutes
        for o, c in zip(self.opens, self.closes, strict=True):
            if c <= start:
                continue
            o = max(o, start)
            if c - o >= left:
                return o + left
            left -= c - o
        return self.closes[-1] + left

    def working_between(self, start: float, stop: float) -> float:
        """Working minutes between two moments."""
        return sum(max(0.0, min(c, stop) - max(o, start))
                   for o, c in zip(self.opens, self.closes, strict=True))

    def working_days(self) -> list[dt.date]:
        return sorted({self.at(o).date() for o in self.opens})


def work_calendar(hours: Hours, first_day: dt.date, days: int = HORIZON_DAYS) -> WorkCalendar:
    """The working spans of ``days`` days from ``first_day``; touching spans are merged."""
    origin = dt.datetime.combine(first_day, dt.time(0, 0))
    spans: list[list[float]] = []
    for d in range(days):
        span = hours.span((first_day + dt.timedelta(days=d)).weekday())
        if span is None:
            continue
        start = d * DAY_MIN + span.start_min
        if spans and start <= spans[-1][1] + 1e-9:
            spans[-1][1] = max(spans[-1][1], start + span.minutes)
        else:
            spans.append([start, start + span.minutes])
    return WorkCalendar(origin, tuple(s[0] for s in spans), tuple(s[1] for s in spans))
