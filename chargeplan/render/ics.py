"""Calendars that signal their changes (RFC 5545, via icalendar), for any planner.

Two ways in, over the same rules (stable UIDs; SEQUENCE raised on an event that changed
since the calendar already on disk, RFC 5545 3.8.7.4):

- the storage planner describes its events (:class:`EventSpec`), compares them with the
  calendar on disk (:func:`read_previous`, called before the new files replace the old) and
  writes the new calendar (:func:`write_calendar`): an unchanged event keeps its SEQUENCE and
  DTSTAMP, so a re-run writes identical bytes; a changed event gets SEQUENCE raised and a
  DTSTAMP of the time of writing (3.8.7.2); an event that disappeared is written once more
  with STATUS:CANCELLED (3.8.1.11), and dropped on the next run;
- the bench builds icalendar events (:func:`new_event`), raises their SEQUENCE against the
  calendar on disk (:func:`previous_events`, :func:`sequence_for`) and packs them
  (:func:`calendar_bytes`).
"""

from __future__ import annotations

import datetime as dt
import hashlib
from dataclasses import dataclass
from pathlib import Path
from typing import Any

__all__ = ["CHANGE_KEYS", "EventSpec", "Previous", "calendar_bytes", "new_event",
           "previous_events", "read_previous", "sequence_for", "write_calendar"]


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


#: What makes an event "changed" for SEQUENCE (RFC 5545 cl. 3.8.7.4: raised when the start,
#: the end or other significant properties change).
CHANGE_KEYS = ("DTSTART", "DTEND", "SUMMARY", "LOCATION", "DESCRIPTION")


def _fingerprint(event: Any) -> tuple[bytes, ...]:
    return tuple(event[k].to_ical() if k in event else b"" for k in CHANGE_KEYS)


def previous_events(path: str | Path) -> dict[str, tuple[int, tuple[bytes, ...]]]:
    """UID -> (SEQUENCE, fingerprint) of the calendar at ``path``; empty if there is none or
    it cannot be read as a calendar (it is then replaced as new)."""
    import icalendar

    target = Path(path)
    if not target.is_file():
        return {}
    try:
        cal = icalendar.Calendar.from_ical(target.read_bytes())
    except (ValueError, KeyError):
        return {}
    out = {}
    for event in cal.walk("VEVENT"):
        out[str(event.get("UID"))] = (int(event.get("SEQUENCE", 0)), _fingerprint(event))
    return out


def new_event(uid: str, start: dt.datetime | dt.date, end: dt.datetime | dt.date, summary: str,
              *, stamp: dt.datetime, description: str = "", location: str = "") -> Any:
    """An event; naive date-times are written as floating local time (RFC 5545 form #1)."""
    import icalendar

    event = icalendar.Event()
    event.add("uid", uid)
    event.add("dtstamp", stamp)
    event.add("dtstart", start)
    event.add("dtend", end)
    event.add("summary", summary)
    if location:
        event.add("location", location)
    if description:
        event.add("description", description)
    return event


def sequence_for(event: Any, previous: dict[str, tuple[int, tuple[bytes, ...]]]) -> Any:
    """Set the event's SEQUENCE: as before when unchanged, one more when it changed."""
    before = previous.get(str(event["UID"]))
    number = 0 if before is None else before[0] + (before[1] != _fingerprint(event))
    event.add("sequence", number)
    return event


def calendar_bytes(prodid: str, events: list[Any]) -> bytes:
    import icalendar

    cal = icalendar.Calendar()
    cal.add("prodid", prodid)
    cal.add("version", "2.0")
    for event in events:
        cal.add_component(event)
    return cal.to_ical()
