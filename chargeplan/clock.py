"""Times of day, date-times and dates as users write them: one form each, or a refusal.

ISO 8601 has many forms, and Python's ``fromisoformat`` reads most of them: ``07.30`` is
07:00:00.3 there (a decimal fraction of a second), ``0730`` is 07:30 and ``2026-12-07`` is
midnight. Where people write times with a point (07.30, common practice in several
countries), that reads half an hour early. So chargeplan reads one form of each:

- a time of day: ``HH:MM`` or ``HH:MM:SS`` (ISO 8601 extended format, two digits each);
- a local date-time: ``YYYY-MM-DD`` then ``T`` (or one space) then such a time, no offset;
- a date: ``YYYY-MM-DD``.

Anything else raises :class:`~chargeplan.units.QuantityError` saying what to write; a time
written with a point, a comma or an ``h`` between hours and minutes is told the colon form.
"""

from __future__ import annotations

import datetime as dt
import re

from chargeplan.units import QuantityError, _text_problem, quote

__all__ = ["parse_date", "parse_datetime", "parse_time"]

_TIME = re.compile(r"([0-9]{2}):([0-9]{2})(?::([0-9]{2}))?", re.ASCII)
_DATE = re.compile(r"([0-9]{4})-([0-9]{2})-([0-9]{2})", re.ASCII)
#: hours and minutes joined by something other than a colon: 07.30, 7.30, 07,30, 7h30
_OTHER_MARK = re.compile(r"([0-9]{1,2})\s*[.,hH]\s*([0-9]{2})", re.ASCII)
_OFFSET = re.compile(r"(?:[zZ]|[-+][0-9]{2}(?::?[0-9]{2})?)", re.ASCII)
_FRACTION = re.compile(r"[.,][0-9]+", re.ASCII)


def _checked(text: str, example: str) -> str:
    shown = text.strip()
    if not shown:
        raise QuantityError("empty", f"write it as {example}")
    if len(shown) > 40:
        raise QuantityError(f"'{quote(shown)}' is {len(shown)} characters long, more than any "
                            "time", f"write it as {example}")
    problem = _text_problem(shown)
    if problem is not None:
        raise QuantityError(problem.problem, f"retype it as {example}")
    if not shown.isascii():
        raise QuantityError(f"'{quote(shown)}' is not written in ASCII digits",
                            f"write it as {example}")
    return shown


def _clock_of(text: str, shown: str, example: str) -> dt.time:
    """``text``, a time of day in the one form, as a time (``shown`` is for messages)."""
    match = _TIME.fullmatch(text)
    if match is None:
        joined = _OTHER_MARK.fullmatch(text)
        if joined is not None:
            fixed = f"{int(joined.group(1)):02d}:{joined.group(2)}"
            raise QuantityError(f"'{quote(shown)}' is not a time of day in the form HH:MM",
                                f"write it with a colon: {quote(shown.replace(text, fixed))}")
        head = _TIME.match(text)
        if head is not None:
            rest = text[head.end():]
            if head.group(3) is not None and _FRACTION.fullmatch(rest):
                raise QuantityError(f"'{quote(shown)}' has a fraction of a second",
                                    f"write whole seconds or none, e.g. "
                                    f"{quote(shown.replace(rest, ''))}")
            if _OFFSET.fullmatch(rest):
                raise QuantityError(f"'{quote(shown)}' has a UTC offset", "write the bench's "
                                    f"local wall-clock time without one, e.g. {example}")
        single = re.fullmatch(r"([0-9]):([0-9]{2})", text)
        fix = (f"write the hour with two digits: 0{text}" if single else
               f"write it as {example} (hours:minutes, 24-hour clock)")
        raise QuantityError(f"'{quote(shown)}' is not a time of day", fix)
    hour, minute = int(match.group(1)), int(match.group(2))
    second = int(match.group(3) or 0)
    if hour == 24 and minute == 0 and second == 0:
        raise QuantityError(f"'{quote(shown)}' is not a time of day",
                            "write midnight as 00:00")
    if hour > 23 or minute > 59 or second > 59:
        raise QuantityError(f"'{quote(shown)}' is not a time of day (hours 00-23, minutes "
                            "and seconds 00-59)", f"write it as {example}")
    return dt.time(hour, minute, second)


def _date_of(text: str, shown: str, example: str) -> dt.date:
    match = _DATE.fullmatch(text)
    if match is None:
        raise QuantityError(f"'{quote(shown)}' is not a date",
                            f"write it as YYYY-MM-DD, e.g. {example}")
    try:
        return dt.date(int(match.group(1)), int(match.group(2)), int(match.group(3)))
    except ValueError as error:
        raise QuantityError(f"'{quote(shown)}' is not a date ({error})",
                            f"write it as YYYY-MM-DD, e.g. {example}") from None


def parse_time(text: str) -> dt.time:
    """A time of day, ``HH:MM`` or ``HH:MM:SS``.

    >>> parse_time("07:30")
    datetime.time(7, 30)
    >>> parse_time("07.30")  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    chargeplan.units.QuantityError: '07.30' is not a time of day in the form HH:MM; ... 07:30
    """
    shown = _checked(text, "08:00")
    return _clock_of(shown, shown, "08:00")


def parse_datetime(text: str) -> dt.datetime:
    """A local wall-clock date-time: ``YYYY-MM-DDTHH:MM[:SS]`` (or a space for the T).

    >>> parse_datetime("2026-12-07T14:00")
    datetime.datetime(2026, 12, 7, 14, 0)
    """
    example = "2026-12-07T14:00"
    shown = _checked(text, example)
    date_text, sep, time_text = shown[:10], shown[10:11], shown[11:]
    day = _date_of(date_text, shown, "2026-12-07") if _DATE.fullmatch(date_text) else None
    if day is None:
        raise QuantityError(f"'{quote(shown)}' is not a date-time",
                            f"write it as YYYY-MM-DDTHH:MM, e.g. {example}")
    if not sep:
        raise QuantityError(f"'{quote(shown)}' is a date without a time",
                            f"give the time too, e.g. {date_text}T14:00")
    if sep not in "T ":
        raise QuantityError(f"'{quote(shown)}' is not a date-time",
                            f"write it as YYYY-MM-DDTHH:MM, e.g. {example}")
    return dt.datetime.combine(day, _clock_of(time_text, shown, example))


def parse_date(text: str) -> dt.date:
    """A date, ``YYYY-MM-DD``.

    >>> parse_date("2026-12-07")
    datetime.date(2026, 12, 7)
    """
    shown = _checked(text, "2026-12-07")
    return _date_of(shown, shown, "2026-12-07")
