"""A valid CSV read column by column into a :class:`Table`: each distinct cell read once.

A large inventory repeats itself: 100,000 batteries have a few chemistries, bays and sizes,
and a few hundred capacities. Read row by row, pydantic makes a model a row and calls each
field's reader once a cell. Read here, each column's distinct cells are read once, by the
same readers, and the values are kept as columns; a row's model is made only when asked for.

This reading gives only what the row-by-row reading (:func:`chargeplan.csvfile.read_rows`)
gives (tests/test_csvcolumns.py holds the two equal over generated files). Where it cannot
be sure of that, or where any row is bad, it gives None, and the caller reads the file row by
row, which reports each problem with its line: a file with a bad cell is read twice, a good
one once. How each field is read:

- a field whose type is ``Annotated[T, Parsed(...)]`` (or that, or None): by its reader, a
  function of the cell alone (:class:`chargeplan.model.fields.Parsed`), as pydantic calls it;
- any other field (a date, a choice of words; its field validators take the value alone):
  each distinct cell is validated by pydantic itself, in the file's first row;
- the checks across fields: the model's ``row_checks`` (:class:`chargeplan.model.rows.
  BatteryRow`), on each distinct set of the values they read. The model may have no other
  model validator, no default factory or default that is no key (rows share a default), no
  private attributes and no post-init;
- columns the model does not know, where a ``carry`` model takes them into one of its fields
  (an inventory's own columns into its notes): by the function its validator uses, once for
  each distinct combination of cells.
"""

from __future__ import annotations

import csv
import inspect
import types
import typing
from collections.abc import Callable, Hashable, Iterator, Sequence
from operator import itemgetter, methodcaller
from pathlib import Path
from typing import Any, Generic, TypeVar, overload

from chargeplan.csvfile import MAX_CELL_CHARS, csv_text, csv_unguard, reader_of
from chargeplan.model.fields import Parsed

__all__ = ["Table", "read_columns"]

M = TypeVar("M")


class Table(Sequence[M], Generic[M]):
    """Rows of one model kept as columns: :meth:`column` gives a field's values, a row a
    model, made when first asked for (and kept)."""

    def __init__(self, columns: dict[str, list[Any]], make: Callable[[int], M], count: int):
        self._columns = columns
        self._make = make
        self._made: dict[int, M] = {}
        self._count = count

    @classmethod
    def of_rows(cls, rows: Sequence[M], names: Sequence[str]) -> Table[M]:
        """A table of models already made; ``names``: the fields :meth:`column` gives."""
        if isinstance(rows, Table):
            return rows
        kept = list(rows)
        columns = {name: [getattr(row, name) for row in kept] for name in names}
        return cls(columns, kept.__getitem__, len(kept))

    @classmethod
    def joined(cls, tables: Sequence[Table[M]]) -> Table[M]:
        """The tables one after the other (their columns of the same names)."""
        tables = [t for t in tables if len(t)]
        if len(tables) == 1:
            return tables[0]
        names = set.intersection(*(set(t._columns) for t in tables)) if tables else set()
        columns = {name: [v for t in tables for v in t._columns[name]] for name in names}
        starts = []
        at = 0
        for t in tables:
            starts.append(at)
            at += len(t)

        def make(i: int) -> M:
            k = max(j for j, s in enumerate(starts) if s <= i)
            return tables[k][i - starts[k]]

        return cls(columns, make, at)

    def column(self, name: str) -> list[Any]:
        """Each row's value of the field ``name`` (the list itself: not to be changed)."""
        return self._columns[name]

    def __len__(self) -> int:
        return self._count

    @overload
    def __getitem__(self, index: int) -> M: ...

    @overload
    def __getitem__(self, index: slice) -> list[M]: ...

    def __getitem__(self, index: int | slice) -> M | list[M]:
        if isinstance(index, slice):
            return [self[i] for i in range(*index.indices(self._count))]
        i = int(index)
        if i < 0:
            i += self._count
        if not 0 <= i < self._count:
            raise IndexError(index)
        try:
            return self._made[i]
        except KeyError:
            row = self._made[i] = self._make(i)
            return row

    def __iter__(self) -> Iterator[M]:
        return (self[i] for i in range(self._count))


class _Unsure(Exception):
    """This reading cannot give the rows as pydantic would: read the file row by row."""


def _parsed_of(annotation: Any, metadata: list[Any]) -> Parsed | None:
    """The field's Parsed, where its type is a Parsed one (or that, or None), else None."""
    if len(metadata) == 1 and isinstance(metadata[0], Parsed):
        return metadata[0]
    if metadata:
        return None
    args = typing.get_args(annotation)
    members = [a for a in args if a is not type(None)]
    if typing.get_origin(annotation) in (typing.Union, types.UnionType) and len(args) == 2 \
            and len(members) == 1 and typing.get_origin(members[0]) is typing.Annotated:
        inner = typing.get_args(members[0])
        if len(inner) == 2 and isinstance(inner[1], Parsed):
            return inner[1]
    return None


def _readable(model: Any) -> bool:
    """Whether the model is one this reading makes as pydantic does (module docstring)."""
    decorators = model.__pydantic_decorators__
    afters = [d.cls_var_name for d in decorators.model_validators.values()]
    return (model.model_config.get("extra") != "allow" and not model.__private_attributes__
            and model.__pydantic_post_init__ is None and not decorators.root_validators
            and not decorators.validators and afters == ["_row_checks"]
            and all(d.info.mode == "after" for d in decorators.model_validators.values())
            and all(f.default_factory is None and isinstance(f.default, Hashable)
                    for f in model.model_fields.values())  # a default rows may share
            and all(len(inspect.signature(d.func).parameters) == 1
                    for d in decorators.field_validators.values()))


def read_columns(path: str | Path, model: Any, *, carry: Any = None) -> Table[Any] | None:
    """The CSV at ``path`` as a :class:`Table` of ``model`` (every field a column), or None
    where this reading cannot be sure of giving what the row-by-row reading gives, or a row
    is bad (see the module docstring). The file's own problems (not UTF-8, a NUL byte, a
    column named twice) are raised as the row-by-row reading raises them.

    ``carry``: the model a row of a file with columns ``model`` does not know is read as
    (``model`` extended by a before-validator that carries them into one of its fields): its
    ``carry_into`` names the field, ``carried(text, [(column, text)...])`` makes it, as the
    validator does; without it, such a file is read row by row."""
    shown = str(path)
    text = csv_text(path)
    reader = reader_of(text, shown)
    if reader.fieldnames is None or not _readable(model):
        return None
    keys = [csv_unguard(name.strip()) for name in reader.fieldnames]
    if "id" not in keys:
        return None
    try:
        columns = _split(text, reader, len(keys))
        if not columns[0]:
            return None
        texts = [_texts(column) for column in columns]
        make = _maker(keys, columns, texts, model)
        unknown = [j for j, key in enumerate(keys) if key not in _known(model)]
        if unknown:
            if carry is None:
                return None
            make = _maker(keys, columns, texts, carry)  # each row's model as the file's
            keys, columns, texts = _carried(keys, columns, texts, unknown, carry)
        return _table(keys, columns, texts, model, make)
    except (_Unsure, csv.Error):
        return None


def _known(model: Any) -> set[str]:
    """The columns a model reads: its fields' names and aliases."""
    fields = model.model_fields
    return set(fields) | {f.alias for f in fields.values() if f.alias}


def _maker(keys: list[str], columns: list[list[str]], texts: list[dict[str, str]],
           model: Any) -> Callable[[int], Any]:
    """A row's model as pydantic reads it, from its cells' texts."""
    validate = model.__pydantic_validator__.validate_python

    def make(i: int) -> Any:
        return validate({key: texts[j][columns[j][i]] for j, key in enumerate(keys)
                         if texts[j][columns[j][i]]})

    return make


def _carried(keys: list[str], columns: list[list[str]], texts: list[dict[str, str]],
             unknown: list[int], carry: Any) -> tuple[list[str], list[list[str]],
                                                       list[dict[str, str]]]:
    """The columns with the unknown ones carried into ``carry.carry_into`` as its
    validator carries them: a row's non-empty unknown cells, in the header's order, made
    into the field's text (made once for each distinct combination of cells)."""
    into = carry.carry_into
    count = len(columns[0])
    at = keys.index(into) if into in keys else None
    own, own_texts = (columns[at], texts[at]) if at is not None else ([""] * count, {"": ""})
    rows = list(zip(own, *(columns[j] for j in unknown), strict=True))
    made: dict[tuple[str, ...], str] = {}
    for cells in set(rows):
        extra = [(keys[j], texts[j][raw]) for j, raw in zip(unknown, cells[1:], strict=True)
                 if texts[j][raw]]
        made[cells] = carry.carried(own_texts[cells[0]], extra) if extra else own_texts[cells[0]]
    carried = list(map(made.__getitem__, rows))
    kept = [j for j in range(len(keys)) if j not in unknown and j != at]
    return ([*(keys[j] for j in kept), into], [*(columns[j] for j in kept), carried],
            [*(texts[j] for j in kept), {text: text for text in made.values()}])


def _split(text: str, reader: Any, width: int) -> list[list[str]]:
    """The cells below the header, column by column (blank lines skipped, a short row's
    missing cells empty). A text without quotes and with one line end holds a record a line:
    split at once, without a list a row; any other is read by the csv module."""
    if '"' not in text and "\r" not in text:
        lines = text.split("\n")[reader.reader.line_num:]
        if "" in lines:  # blank lines are skipped
            lines = [line for line in lines if line]
        if not lines:
            return [[] for _ in range(width)]
        if set(map(methodcaller("count", ","), lines)) == {width - 1}:
            flat = ",".join(lines).split(",")
            return [flat[j::width] for j in range(width)]
        table = [line.split(",") for line in lines]
    else:
        table = [row for row in reader.reader if row]  # blank lines skipped, as row by row
    widths = set(map(len, table))
    if widths - {width}:
        if max(widths) > width:
            raise _Unsure
        table = [row + [""] * (width - len(row)) for row in table]  # a short row: empty cells
    return [list(map(itemgetter(j), table)) for j in range(width)]


def _field_names(keys: list[str], model: Any) -> list[str]:
    """Each column's field (a column may be named by its field's alias or its name)."""
    by_key: dict[str, str] = {}
    for name, info in model.model_fields.items():
        by_key[name] = name
        if info.alias:
            by_key[info.alias] = name
    names = [by_key.get(key) for key in keys]
    if None in names or len(set(names)) != len(names):  # an unknown column, or one twice
        raise _Unsure
    return typing.cast(list[str], names)


def _texts(column: list[str]) -> dict[str, str]:
    """Each distinct cell of a column and its text as the row-by-row reading takes it
    (stripped and unguarded: "" where empty)."""
    cells = list(set(column))
    if max(map(len, cells), default=0) > MAX_CELL_CHARS or "\n" in "".join(cells):
        raise _Unsure  # an over-long cell, a quote not closed
    texts = dict(zip(cells, map(str.strip, cells), strict=True))
    if "'" in "".join(cells):  # a guarded cell, perhaps: take its apostrophe off
        for raw, text in texts.items():
            if "'" in text:
                texts[raw] = csv_unguard(text)
    return texts


def _table(keys: list[str], columns: list[list[str]], texts: list[dict[str, str]], model: Any,
           make: Callable[[int], Any]) -> Table[Any]:
    names = _field_names(keys, model)
    fields = model.model_fields
    validate = model.__pydantic_validator__.validate_python
    id_texts = list(map(texts[keys.index("id")].__getitem__, columns[keys.index("id")]))
    if "" in id_texts or len(set(id_texts)) != len(id_texts):  # reported row by row
        raise _Unsure
    readers = [_parsed_of(fields[name].annotation, fields[name].metadata) for name in names]
    first = {key: texts[j][columns[j][0]] for j, key in enumerate(keys)
             if texts[j][columns[j][0]] and readers[j] is not None}
    values: dict[str, list[Any]] = {}
    for j, (key, name) in enumerate(zip(keys, names, strict=True)):
        info, read = fields[name], readers[j]
        raws, given = list(texts[j]), list(texts[j].values())
        value_of: dict[str, Any] = {}
        if "" in given:  # empty cells: the field's default, where it has one
            if info.is_required():
                raise _Unsure
            value_of = dict.fromkeys((raw for raw, text in zip(raws, given, strict=True)
                                      if not text), info.default)
            raws, given = [r for r in raws if r not in value_of], [t for t in given if t]
        try:
            if read is not None and read.parse_many is not None:  # a whole column at once
                value_of.update(zip(raws, read.parse_many(given), strict=True))
            elif read is not None:
                value_of.update(zip(raws, map(read.parse, given), strict=True))
            else:  # validated by pydantic itself, with the first row's other cells
                value_of.update((raw, getattr(validate({**first, key: text}), name))
                                for raw, text in zip(raws, given, strict=True))
        except (ValueError, AssertionError):  # (a ValidationError is a ValueError)
            raise _Unsure from None
        values[name] = list(map(value_of.__getitem__, columns[j]))
    count = len(columns[0])
    for name, info in fields.items():
        if name not in values:
            if info.is_required():
                raise _Unsure
            values[name] = [info.default] * count
    for checked, check in model.row_checks:
        try:
            distinct = set(zip(*(values[name] for name in checked), strict=True))
        except TypeError:  # a value that is no key: read row by row
            raise _Unsure from None
        if any(check(*given) is not None for given in distinct):
            raise _Unsure

    return Table(values, make, count)
