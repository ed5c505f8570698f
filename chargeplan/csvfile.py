"""Reading and writing CSV files: one place for the planners' inventories, readings and logs.

Reading: UTF-8 with or without a byte-order mark, any line ends, physical line numbers in
every message, and every bad row reported at once (:class:`InputErrors`).

Writing: :func:`csv_cell` guards a cell that a spreadsheet would run as a formula (OWASP,
"CSV Injection"): a cell starting with ``=``, ``+``, ``-``, ``@``, a tab or a carriage
return gets a leading apostrophe, unless it is one plain number. :func:`csv_unguard` takes
the apostrophe off again, and every reader here applies it, so the files the tool writes
read back as they are. :func:`csv_row` writes a row of cells so guarded; :func:`csv_fields`
gives cells guarded and quoted as that row holds them, for a table that writes each distinct
cell once.
"""

from __future__ import annotations

import csv
import re
from collections.abc import Iterable, Iterator
from functools import cache
from itertools import compress
from pathlib import Path
from typing import Any

from chargeplan.errors import InputError

__all__ = ["MAX_CELL_CHARS", "MAX_CSV_BYTES", "InputErrors", "csv_cell", "csv_fields",
           "csv_reader", "csv_row", "csv_rows", "csv_text", "csv_unguard", "read_rows",
           "reader_of"]

#: Characters that make a spreadsheet read a cell as a formula (OWASP "CSV Injection").
_FORMULA_START = ("=", "+", "-", "@", "\t", "\r")
#: One plain number: what a spreadsheet may read as a number, and nothing else.
_PLAIN_NUMBER = re.compile(r"[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?")


def csv_cell(value: object) -> str:
    """The cell as text, with a leading apostrophe if a spreadsheet would run it as a formula.

    >>> csv_cell("=HYPERLINK(1)")
    "'=HYPERLINK(1)"
    >>> csv_cell("-5.5")
    '-5.5'
    >>> csv_cell("-2+3+cmd|x")
    "'-2+3+cmd|x"
    >>> csv_cell("'-")  # read back by csv_unguard as "'-", not "-"
    "''-"
    """
    text = "" if value is None else str(value)
    if text.lstrip("'").startswith(_FORMULA_START) and not _PLAIN_NUMBER.fullmatch(text):
        return "'" + text  # (a text already starting with apostrophes keeps them on reading)
    return text


def csv_unguard(text: str) -> str:
    """Undo :func:`csv_cell`: the apostrophe it added comes off, nothing else changes.

    >>> csv_unguard("'=HYPERLINK(1)")
    '=HYPERLINK(1)'
    >>> csv_unguard("'quoted")
    "'quoted"
    """
    if text.startswith("'") and text.lstrip("'").startswith(_FORMULA_START):
        return text[1:]
    return text


_FORMULA_CHARS = "".join(_FORMULA_START)
#: A cell that may need a guard, in cells each after a NUL character: a formula's first
#: character, or an apostrophe before one (a literal first character: the regular expression
#: engine skips to each NUL, where ``^|\x00`` would try every position).
_GUARD_AT = re.compile("\x00'*[" + re.escape(_FORMULA_CHARS) + "]")
_FORMULA_SET = frozenset(_FORMULA_CHARS)


def _guarded(cells: Iterable[object]) -> list[str]:
    """Every cell as :func:`csv_cell` gives it (inlined: a schedule writes millions)."""
    row = []
    for value in cells:
        text = "" if value is None else value if type(value) is str else str(value)
        if text and text[0] in _FORMULA_CHARS and not _PLAIN_NUMBER.fullmatch(text):
            text = "'" + text
        elif text[:1] == "'" and text.lstrip("'")[:1] in _FORMULA_SET:
            text = "'" + text  # as csv_cell: its own apostrophes survive csv_unguard
        row.append(text)
    return row


def csv_row(writer: Any, cells: Iterable[object]) -> None:
    """Write one row through ``writer`` (a ``csv.writer``), every cell guarded as
    :func:`csv_cell` guards it."""
    writer.writerow(_guarded(cells))


@cache
def _quoted_for() -> re.Pattern[str]:
    """The characters for which ``csv.writer(out, lineterminator="\\n")`` quotes a cell:
    asked of the writer itself (its delimiter and quote character, and which of the line
    ends depends on the Python version)."""
    import io

    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n")
    found = ""
    for c in ',"\r\n':
        out.seek(0)
        out.truncate()
        writer.writerow(("a" + c, ""))
        if out.getvalue().startswith('"'):
            found += c
    return re.compile("[" + re.escape(found) + "]")


def csv_fields(cells: Iterable[object]) -> list[str]:
    """Each cell as :func:`csv_row` writes it through ``csv.writer(out,
    lineterminator="\\n")``: guarded, then quoted where the writer quotes it (its quote
    character doubled). Joined with commas, the fields of a row of two cells or more are its
    line; a table can so write each distinct cell once.

    >>> csv_fields(["=1+2", 'say "hi", then go', "-5.5", None])
    ["'=1+2", '"say ""hi"", then go"', '-5.5', '']
    """
    fields = list(cells)
    try:  # all text: one look at the texts joined tells whether any cell needs a guard
        joined = "\x00".join(fields)
        if _GUARD_AT.search("\x00" + joined):
            raise TypeError
    except TypeError:
        fields = _guarded(fields)
        joined = "".join(fields)
    quoted = _quoted_for()
    if quoted.search(joined) is None:
        return fields
    return ['"' + text.replace('"', '""') + '"' if quoted.search(text) else text
            for text in fields]


class InputErrors(InputError):
    """Several bad rows at once: each is one line naming the file, the line and the fix."""

    def __init__(self, lines: list[str]) -> None:
        self.lines = lines
        super().__init__(f"{len(lines)} bad rows", fix="mend each row listed")


#: The largest CSV read, in bytes: an inventory of a million batteries is about 80 MB.
MAX_CSV_BYTES = 256 * 1024 * 1024
#: The longest cell read, in characters: ids, owners and quantities are a few dozen.
MAX_CELL_CHARS = 4096


def _line_of(text: str, index: int) -> int:
    return text.count("\n", 0, index) + 1


def csv_reader(path: str | Path) -> tuple[str, csv.DictReader]:
    """A CSV file (UTF-8, with or without a byte-order mark, any line ends) as a reader whose
    ``line_num`` is the physical line.

    The file is read through :func:`chargeplan.loading.read_input` (a regular file, at most
    MAX_CSV_BYTES); NUL bytes, a header naming a column twice (in any case) and an over-long
    header cell are refused with their line, and so is a file separated by semicolons.
    Column names are read in any case.
    """
    shown = str(path)
    return shown, reader_of(csv_text(path), shown)


def csv_text(path: str | Path) -> str:
    """The CSV file's text, as :func:`csv_reader` reads it."""
    from chargeplan.loading import read_input

    raw = read_input(path, what="CSV", limit=MAX_CSV_BYTES)
    try:
        return raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        raise InputError("is not UTF-8 text", file=str(path),
                         fix="save the CSV as UTF-8") from None


def reader_of(text: str, shown: str) -> csv.DictReader:
    """:func:`csv_reader`'s reader of a file's ``text`` (``shown``: its name in messages), its
    header read and checked."""
    import io

    nul = text.find("\x00")
    if nul >= 0:
        raise InputError(f"line {_line_of(text, nul)}: holds a NUL byte", file=shown,
                         fix="save the file as plain CSV text (a spreadsheet's 'CSV UTF-8')")
    reader = csv.DictReader(io.StringIO(text, newline=""))
    try:
        header = reader.fieldnames
    except csv.Error as error:
        raise _csv_error(error, shown, reader.reader.line_num) from None
    if header is not None:  # column names in any case ("ID", "Owner"), as chemistry names
        reader.fieldnames = [name.lower() for name in header]
        header = reader.fieldnames
    if header is not None and len(header) == 1 and header[0].count(";") >= 2:
        raise InputError("line 1: the columns are separated by ';', not ','", file=shown,
                         fix="save it as comma-separated CSV (a spreadsheet's 'CSV UTF-8')")
    names = [csv_unguard(name.strip()) for name in header or []]
    for name in names:
        if len(name) > MAX_CELL_CHARS:
            raise InputError(f"line 1: a header cell is {len(name):,} characters long",
                             file=shown, fix="write the column names of the header row")
    twice = next((name for i, name in enumerate(names) if name in names[:i]), None)
    if twice is not None:
        raise InputError(f"line 1: the column '{twice[:80]}' is named twice in the header",
                         file=shown,
                         fix="keep one column of each name: which one is meant is not clear")
    return reader


def _csv_error(error: csv.Error, shown: str, line: int) -> InputError:
    problem = str(error)
    if "field larger than field limit" in problem:
        return InputError(f"line {line}: a cell is longer than {MAX_CELL_CHARS:,} characters",
                          file=shown, fix="check the row: no cell of this file is that long")
    return InputError(f"line {line}: not valid CSV ({problem})", file=shown,
                      fix="check the row for a stray quote")


def csv_rows(reader: Any, shown: str, errors: list[str]) -> Iterator[tuple[int, dict[str, str]]]:
    """Each row's line and non-empty cells (stripped and unguarded, under the header's names);
    a stray quote, an extra cell or an over-long cell is an error (a row the csv module cannot
    read ends the file's reading). Blank lines are skipped.

    ``reader`` is the one :func:`csv_reader` returns, its header read. The rows are taken from
    the csv reader under it as lists (a dict a row, built here once, instead of the
    DictReader's dict and then ours); the header's names are stripped and unguarded once.
    """
    rows = reader.reader  # the csv reader: its line_num is the physical line
    header = reader.fieldnames or []
    keys = [csv_unguard(name.strip()) for name in header]
    width = len(header)
    previous = rows.line_num
    try:
        for cells in rows:
            if not cells:  # a blank line
                continue
            line = rows.line_num
            first, previous = previous + 1, line
            joined = "".join(cells)  # one test of the row's text; each cell only if it fails
            if "\n" in joined and any("\n" in cell for cell in cells[:width]):
                errors.append(f"{shown}: line {first}: a quote is not closed (it runs to line "
                              f"{line}); check the row for a stray double quote")
                continue
            if len(cells) > width:
                errors.append(f"{shown}: line {line}: has more cells than the header; check "
                              "for a stray comma or quote")
                continue
            if len(joined) > MAX_CELL_CHARS:
                long = next(((name, cell) for name, cell in zip(header, cells, strict=False)
                             if len(cell) > MAX_CELL_CHARS), None)
                if long is not None:
                    errors.append(f"{shown}: line {line}: {long[0][:80]}: the cell is "
                                  f"{len(long[1]):,} characters long, more than "
                                  f"{MAX_CELL_CHARS:,}; check the row")
                    continue
            stripped = list(map(str.strip, cells))
            data = dict(compress(zip(keys, stripped, strict=False), stripped))  # the non-empty
            if "'" in joined:  # a guarded cell, perhaps: take the apostrophe off
                data = {key: csv_unguard(cell) for key, cell in data.items()}
            yield line, data
    except csv.Error as error:  # the csv module cannot read on: the file's reading ends
        errors.append(str(_csv_error(error, shown, rows.line_num)))


def read_rows(path: str | Path, model: Any, *, plain: Any = None) -> list[Any]:
    """Rows of a CSV as ``model``s; every bad row is reported (with its line) at once.

    ``plain``: the model ``model`` extends with a reading of columns it does not know; where
    the header names none such, the rows are read as ``plain`` (the same fields and checks,
    one step less a row)."""
    from pydantic import ValidationError

    from chargeplan.loading import input_error

    shown, reader = csv_reader(path)
    if reader.fieldnames is None:
        raise InputError("is empty", file=shown, fix="write a header row, then one row a battery")
    rows: list[Any] = []
    errors: list[str] = []
    seen: set[str | None] = set()
    if plain is not None:
        fields = plain.model_fields
        known = {f.alias or name for name, f in fields.items()} | set(fields)
        if known.issuperset(csv_unguard(name.strip()) for name in reader.fieldnames):
            model = plain
    validate = model.__pydantic_validator__.validate_python  # what model_validate calls
    for line, data in csv_rows(reader, shown, errors):
        battery = data.get("id")  # (a row without one is told so by the model)
        if battery is not None and battery in seen:
            errors.append(f"{shown}: line {line}: id: '{battery}' is listed twice; give "
                          "each battery its own id")
            continue
        seen.add(battery)
        try:
            rows.append(validate(data))
        except ValidationError as error:
            problem = input_error(error, file=f"{shown}: line {line}", model=model)
            errors.append(str(problem))
    if errors:
        raise InputErrors(errors)
    return rows
