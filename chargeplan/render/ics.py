"""Calendars that signal their changes (RFC 5545, via icalendar), for every planner.

A planner describes its events (:class:`EventSpec`: all-day, with dates, or timed, with
floating local date-times, RFC 5545 3.3.5 form #1), reads the calendar already on disk
(:func:`read_previous`, called before the new files replace the old) and writes the new one
(:func:`write_calendar`). UIDs are stable, so the two are compared event by event:

- an unchanged event keeps its SEQUENCE and DTSTAMP, so a re-run writes identical bytes;
- a changed event (its start, end, summary, location, description or status) gets SEQUENCE
  raised (3.8.7.4) and a DTSTAMP of the time of writing (3.8.7.2);
- an event that disappeared is written with STATUS:CANCELLED (3.8.1.11) and SEQUENCE raised,
  where the planner asks for that (a storage round that is no longer planned), and kept so
  on later runs: should the round come back, its SEQUENCE is raised again, never reset to
  0 (a calendar that saw the cancellation would take a lower one as stale, 3.8.7.4); else
  it is dropped (a bench job that finished is not cancelled).
"""

from __future__ import annotations

import datetime as dt
import hashlib
from dataclasses import dataclass, replace
from pathlib import Path

__all__ = ["EventSpec", "Previous", "read_previous", "write_calendar"]


@dataclass(frozen=True)
class EventSpec:
    uid: str
    start: dt.date | dt.datetime  # a date: an all-day event; a naive date-time: local time
    end: dt.date | dt.datetime  # exclusive (DTEND)
    summary: str
    description: str
    location: str = ""
    status: str = "CONFIRMED"

    def fingerprint(self) -> str:
        text = "\x1f".join((self.start.isoformat(), self.end.isoformat(), self.summary,
                            self.location, self.description, self.status))
        return hashlib.sha256(text.encode()).hexdigest()


@dataclass(frozen=True)
class Previous:
    spec: EventSpec
    sequence: int
    stamp: dt.datetime


def read_previous(path: str | Path) -> dict[str, Previous]:
    """The events of the calendar at ``path`` by UID; none if there is no such file or it is
    not a calendar (it is then replaced as if new)."""
    import icalendar

    target = Path(path)
    if not target.is_file():
        return {}
    try:
        cal = icalendar.Calendar.from_ical(target.read_bytes())
    except ValueError:
        return {}
    out: dict[str, Previous] = {}
    for event in cal.walk("VEVENT"):
        try:
            spec = EventSpec(str(event["uid"]), event.decoded("dtstart"),
                             event.decoded("dtend"), str(event.get("summary", "")),
                             str(event.get("description", "")),
                             str(event.get("location", "")),
                             str(event.get("status", "CONFIRMED")))
            stamp = event.decoded("dtstamp")
        except (KeyError, ValueError):
            continue
        out[spec.uid] = Previous(spec, int(event.get("sequence", 0)), stamp)
    return out


def _stamped(spec: EventSpec, previous: Previous | None,
             now: dt.datetime) -> tuple[EventSpec, int, dt.datetime]:
    if previous is None:
        return spec, 0, now
    if previous.spec.fingerprint() == spec.fingerprint():
        return spec, previous.sequence, previous.stamp
    return spec, previous.sequence + 1, now


def write_calendar(events: list[EventSpec], previous: dict[str, Previous], *, prodid: str,
                   now: dt.datetime | None = None, cancel_missing: bool = True) -> bytes:
    """The calendar (bytes), compared with ``previous`` as the module docstring says
    (``now``: the time of writing, UTC; ``cancel_missing``: an event of ``previous`` that is
    not in ``events`` is written once as CANCELLED, else dropped)."""
    import icalendar

    now = (now or dt.datetime.now(dt.UTC)).replace(microsecond=0)
    chosen = [_stamped(e, previous.get(e.uid), now) for e in events]
    uids = {e.uid for e in events}
    for uid, old in previous.items():
        if not cancel_missing or uid in uids:
            continue
        if old.spec.status == "CANCELLED":  # kept as it was: its SEQUENCE never goes back
            chosen.append((old.spec, old.sequence, old.stamp))
        else:
            chosen.append((replace(old.spec, status="CANCELLED"), old.sequence + 1, now))
    cal = icalendar.Calendar()
    cal.add("prodid", prodid)
    cal.add("version", "2.0")
    # by start (ISO text: a calendar from elsewhere may mix dates and date-times), then UID
    for spec, sequence, stamp in sorted(chosen, key=lambda c: (c[0].start.isoformat(), c[0].uid)):
        event = icalendar.Event()
        event.add("uid", spec.uid)
        event.add("dtstamp", stamp)
        event.add("dtstart", spec.start)
        event.add("dtend", spec.end)
        event.add("sequence", sequence)
        event.add("status", spec.status)
        event.add("summary", spec.summary)
        if spec.location:
            event.add("location", spec.location)
        event.add("description", spec.description)
        cal.add_component(event)
    return cal.to_ical()
