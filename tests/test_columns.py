"""Tables made column by column (render.columns): the CSV lines are those csv_row writes row
by row, however the columns are joined, and a packed key tells rows apart as their columns
do."""

from __future__ import annotations

import csv
import io

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from chargeplan.csvfile import csv_row
from chargeplan.render.columns import Column, by_key, csv_lines, csv_text, distinct, floats, pack

TEXT = st.text(alphabet="=+-@\t\r\n'\",.e0123456789 ax|(", max_size=6)


@st.composite
def tables(draw):
    rows = draw(st.integers(0, 60))
    columns = []
    for _ in range(draw(st.integers(2, 6))):
        if columns and draw(st.booleans()):  # indexed as the one before: joined text by text
            texts = draw(st.lists(TEXT, min_size=len(columns[-1].texts),
                                  max_size=len(columns[-1].texts)))
            columns.append(Column(texts, columns[-1].codes))
            continue
        texts = draw(st.lists(st.one_of(TEXT, st.integers(-9, 9)), min_size=1, max_size=8))
        codes = np.array(draw(st.lists(st.integers(0, len(texts) - 1), min_size=rows,
                                       max_size=rows)), dtype=np.intp)
        columns.append(Column(texts, codes))
    return columns


@settings(max_examples=300)
@given(tables())
def test_lines_are_the_rows_csv_row_writes(columns):
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n")
    writer.writerow(["a", "b"])
    for row in zip(*(c.values() for c in columns), strict=True):
        csv_row(writer, row)
    assert csv_text(["a", "b"], csv_lines(columns)) == out.getvalue()
    fields = [c.as_fields() for c in columns]  # fields made once, for several tables
    assert csv_lines(fields) == csv_lines(columns)


@given(st.lists(st.tuples(st.integers(-3, 3), st.sampled_from([0, 2**40, -(2**40), 7]),
                          st.booleans()), max_size=40))
def test_a_packed_key_tells_rows_apart_as_their_columns_do(rows):
    columns = [np.array(c, dtype=np.int64) for c in zip(*rows, strict=True)] if rows else [
        np.zeros(0, dtype=np.int64)] * 3
    key = pack(*columns, *columns, *columns)  # wide enough to take the compressing branch
    for i, a in enumerate(rows):
        for j, b in enumerate(rows):
            assert (key[i] == key[j]) == (a == b)


def test_by_key_makes_each_text_once_from_its_first_row():
    made = []
    column = by_key(np.array([10, 11, 12, 13]), np.array([5, 3, 5, 3]),
                    lambda k: made.append(k) or f"v{k}")
    assert sorted(made) == [10, 11]
    assert column.values() == ["v10", "v11", "v10", "v11"]


def test_floats_write_each_value_as_python_does():
    values = np.array([0.0, -0.0, np.nan, 0.05, 0.15, 2.5, -np.inf, 0.05])
    assert floats(values, ".1f", blank="").values() == [
        f"{x:.1f}" if x == x else "" for x in values.tolist()]
    assert floats(values, ".0f", suffix=" %").values()[2] == "nan %"
    assert distinct(["b", "a", "b"]).values() == ["b", "a", "b"]
