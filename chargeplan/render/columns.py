"""Tables of many rows and few distinct cells, made column by column.

A :class:`Column` holds its distinct texts once and, per row, which one; a text made per
distinct key (:func:`by_key`) is so made once however many rows show it, and a CSV table
(:func:`csv_lines`) guards and quotes each distinct cell once (``csvfile.csv_fields``), as
``csv_row`` would have written it row by row. Before the rows are joined, neighbouring
columns are joined into one: text by text where they index their texts alike, else once
per combination where they have few distinct cells; a row then costs a few joins, not one
per cell.
"""

from __future__ import annotations

from collections.abc import Callable, Iterable, Sequence
from typing import Any, NamedTuple

import numpy as np

from chargeplan.csvfile import csv_fields

__all__ = ["Column", "by_key", "csv_lines", "csv_text", "distinct", "floats", "pack"]


class Column(NamedTuple):
    """A column's distinct ``texts`` and, per row, the index of its text (``codes``);
    ``fields``: the texts are CSV fields already (see :meth:`as_fields`)."""

    texts: Sequence[Any]
    codes: np.ndarray
    fields: bool = False

    def of(self, rows: np.ndarray) -> Column:
        """The column at ``rows`` (indices into this column's rows)."""
        return self._replace(codes=self.codes[rows])

    def as_fields(self) -> Column:
        """The texts guarded and quoted for CSV (``csv_fields``), for a column that several
        tables show."""
        return self if self.fields else Column(csv_fields(self.texts), self.codes, True)

    def values(self) -> list[Any]:
        """The column row by row."""
        table = np.fromiter(self.texts, dtype=object, count=len(self.texts))
        return table[self.codes].tolist()

    @classmethod
    def constant(cls, text: str, rows: int) -> Column:
        return cls([text], np.zeros(rows, dtype=np.intp))


def pack(*columns: Any) -> np.ndarray:
    """Integer columns (one entry per row) as one int64 key per row: two rows get the same
    key exactly when they agree in every column."""
    rows = len(columns[0])
    key = np.zeros(rows, dtype=np.int64)
    if not rows:
        return key
    span = 1  # the number of keys so far: every key lies in [0, span)
    for column in columns:
        c = np.asarray(column).astype(np.int64)
        c = c - c.min()
        width = int(c.max()) + 1
        if span * width >= 2**62:  # keep what the rows take, not the whole range
            _seen, inverse = np.unique(key, return_inverse=True)
            key, span = inverse.ravel().astype(np.int64), len(_seen)
            _seen, inverse = np.unique(c, return_inverse=True)
            c, width = inverse.ravel().astype(np.int64), len(_seen)
        key = key * width + c
        span *= width
    return key


def by_key(chosen: np.ndarray, key: np.ndarray, make: Callable[[int], Any]) -> Column:
    """A column made once per distinct ``key`` (one int64 per row): ``make`` gets the visit
    (``chosen`` at the first row with that key)."""
    if not len(chosen):
        return Column([], np.zeros(0, dtype=np.intp))
    _unique, first, inverse = np.unique(key, return_index=True, return_inverse=True)
    return Column([make(int(k)) for k in chosen[first]], inverse.ravel())


def distinct(values: Iterable[Any]) -> Column:
    """Hashable values as a column, each distinct value once (in order of appearance; equal
    values are one, so give values of one type)."""
    values = list(values)
    index = {x: j for j, x in enumerate(dict.fromkeys(values))}
    return Column(list(index), np.fromiter(map(index.__getitem__, values), dtype=np.intp,
                                           count=len(values)))


def floats(values: np.ndarray, spec: str, *, blank: str | None = None,
           suffix: str = "") -> Column:
    """Numbers as ``format(x, spec) + suffix``, NaN as ``blank`` (unless None); each
    distinct one once (distinct as stored: 0.0 and -0.0 are written apart, as Python writes
    them)."""
    bits, inverse = np.unique(np.ascontiguousarray(values, dtype=np.float64).view(np.int64),
                              return_inverse=True)
    return Column([blank if blank is not None and x != x else format(x, spec) + suffix
                   for x in bits.view(np.float64).tolist()], inverse.ravel())


#: Neighbouring columns are written as one where their combinations number at most the
#: rows over this: a combination is joined once, where a cell costs each row.
MERGE_SHARE = 8


def _compact(column: Column) -> Column:
    """Each distinct text once (a column made per key may show one text for many keys)."""
    index: dict[Any, int] = {}
    remap = np.fromiter((index.setdefault(t, len(index)) for t in column.texts), dtype=np.intp,
                        count=len(column.texts))
    return Column(list(index), remap[column.codes], column.fields)


def _alike_joined(columns: list[Column]) -> list[Column]:
    """Neighbouring columns of fields that index their texts alike (each battery's id and
    owner, a charge's settings) as one, joined text by text."""
    out: list[Column] = []
    for column in columns:
        last = out[-1] if out else None
        if last is not None and len(last.texts) == len(column.texts) and (
                last.codes is column.codes or np.array_equal(last.codes, column.codes)):
            out[-1] = Column([a + "," + b for a, b in zip(last.texts, column.texts, strict=True)],
                             last.codes, True)
        else:
            out.append(column)
    return out


def csv_lines(columns: Sequence[Column]) -> list[str]:
    """The rows as CSV lines (no line end), each cell guarded and quoted as ``csv_row``
    writes it; each distinct cell is guarded and quoted once, and neighbouring columns are
    joined before the rows are: text by text where they index their texts alike, else per
    combination where they have few distinct cells (see MERGE_SHARE)."""
    limit = len(columns[0].codes) // MERGE_SHARE if columns else 0
    parts: list[Column] = []
    for column in _alike_joined([c.as_fields() for c in columns]):
        if len(column.texts) <= limit:
            column = _compact(column)
        last = parts[-1] if parts else None
        if last is not None and len(last.texts) * len(column.texts) <= limit:
            parts[-1] = Column([a + "," + b for a in last.texts for b in column.texts],
                               last.codes * len(column.texts) + column.codes, True)
        else:
            parts.append(column)
    return list(map(",".join, zip(*(part.values() for part in parts), strict=True)))


def csv_text(header: Sequence[str], lines: Sequence[str]) -> str:
    """A CSV file: the header, then the lines, each ended by ``\\n``."""
    return "\n".join([",".join(csv_fields(header)), *lines]) + "\n"
