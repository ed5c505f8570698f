"""Calendar helpers (RFC 5545, via icalendar) that any planner's calendar can share: events
with stable UIDs, and SEQUENCE raised on an event that changed since the calendar already on
disk."""

from __future__ import annotations

import datetime as dt
from pathlib import Path
from typing import Any

__all__ = ["CHANGE_KEYS", "calendar_bytes", "new_event", "previous_events", "sequence_for"]

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
