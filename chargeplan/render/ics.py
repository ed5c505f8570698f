"""Calendars that signal their changes (RFC 5545), for any planner that writes one.

A planner describes its events (:class:`EventSpec`: a stable UID and the content); this
module compares them with the calendar already on disk (:func:`read_previous`, to be called
before the new files replace the old) and writes the new calendar (:func:`write_calendar`):

- an unchanged event keeps its SEQUENCE and DTSTAMP, so a re-run writes identical bytes;
- a changed event gets SEQUENCE raised by one and a DTSTAMP of the time of writing
  (RFC 5545 3.8.7.4 and 3.8.7.2);
- an event that disappeared is written once more with STATUS:CANCELLED and SEQUENCE raised
  (RFC 5545 3.8.1.11), and dropped on the next run.
"""

from __future__ import annotations

import datetime as dt
import hashlib
from dataclasses import dataclass
from pathlib import Path

__all__ = ["EventSpec", "Previous", "read_previous", "write_calendar"]


@dataclass(frozen=True)
class EventSpec:
    uid: str
    start: dt.date
    end: dt.date  # exclusive (DTEND of an all-day event)
    summary: str
    description: str
    status: str = "CONFIRMED"

    def fingerprint(self) -> str:
        text = "\x1f".join((self.start.isoformat(), self.end.isoformat(), self.summary,
                            self.description, self.status))
        return hashlib.sha256(text.encode()).hexdigest()


@dataclass(frozen=True)
class Previous:
    spec: EventSpec
    sequence: int
    stamp: dt.datetime


def _as_date(value: object) -> dt.date:
    return value.date() if isinstance(value, dt.datetime) else value  # type: ignore[return-value]


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
            spec = EventSpec(str(event["uid"]), _as_date(event.decoded("dtstart")),
                             _as_date(event.decoded("dtend")), str(event.get("summary", "")),
                             str(event.get("description", "")),
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
                   now: dt.datetime | None = None) -> bytes:
    """The calendar (bytes), compared with ``previous`` as the module docstring says."""
    import icalendar

    now = (now or dt.datetime.now(dt.UTC)).replace(microsecond=0)
    chosen = [_stamped(e, previous.get(e.uid), now) for e in events]
    uids = {e.uid for e in events}
    for uid, old in previous.items():
        if uid not in uids and old.spec.status != "CANCELLED":
            cancelled = EventSpec(uid, old.spec.start, old.spec.end, old.spec.summary,
                                  old.spec.description, "CANCELLED")
            chosen.append((cancelled, old.sequence + 1, now))
    cal = icalendar.Calendar()
    cal.add("prodid", prodid)
    cal.add("version", "2.0")
    for spec, sequence, stamp in sorted(chosen, key=lambda c: (c[0].start, c[0].uid)):
        event = icalendar.Event()
        event.add("uid", spec.uid)
        event.add("dtstamp", stamp)
        event.add("dtstart", spec.start)
        event.add("dtend", spec.end)
        event.add("sequence", sequence)
        event.add("status", spec.status)
        event.add("summary", spec.summary)
        event.add("description", spec.description)
        cal.add_component(event)
    return cal.to_ical()
