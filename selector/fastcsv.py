"""A fast path for reading large, plain parts tables (pandas' C parser).

The library loader splits CSV text with the ``csv`` module, which is exact about
quoting and row numbers but runs Python code per row.  Most large tables are plain:
no quote characters, ``\\n`` or ``\\r\\n`` line ends, no over-long cell.  For those every
record is one line and pandas' C tokenizer gives the same cells far faster.
:func:`read_plain` returns ``None`` for anything else (and for any shape it is not
sure about), and the loader then takes its exact path, so messages and row numbers
never depend on which path ran.
"""
from __future__ import annotations

import csv
import io

import numpy as np
import pandas as pd

MAX_LINE_CHARS = 131072  # the csv module's default field limit


def read_plain(text: str) -> tuple[list[str], pd.DataFrame] | None:
    """Header cells and body (text columns ``0..width-1``, ``""`` for empty) of a
    quote-free CSV whose first line is the header, or ``None`` to use the exact path.
    """
    if '"' in text or "\x00" in text:
        return None
    if "\r" in text and "\r" in text.replace("\r\n", "\n"):
        return None  # a lone carriage return ends a record for the csv module only
    first = text.split("\n", 1)[0]
    if not first.strip(" \t,\r"):
        return None  # blank rows before the header: the exact path counts them
    lines = text.count("\n") + 1
    if len(text) > MAX_LINE_CHARS and max(map(len, text.split("\n"))) > MAX_LINE_CHARS:
        return None
    try:
        frame = pd.read_csv(io.StringIO(text), header=None, dtype=object, na_filter=False,
                            skip_blank_lines=False, quoting=csv.QUOTE_NONE, sep=",",
                            engine="c")
    except (pd.errors.ParserError, ValueError, MemoryError):
        return None  # a row longer than the first: the exact path says which
    if frame.empty or len(frame) > lines:
        return None
    header = [str(cell) for cell in frame.iloc[0].tolist()]
    while header and header[-1].strip() == "":
        header = header[:-1]
    width = len(header)
    body = frame.iloc[1:].reset_index(drop=True)
    if body.shape[1] > width:
        if not blank_rows(body.iloc[:, width:]).all():
            return None  # data beyond the header: the exact path reports it
        body = body.iloc[:, :width]
    body.columns = range(width)
    return header, body.astype(str)


def blank_rows(frame: pd.DataFrame) -> np.ndarray:
    """True for each row whose every cell is empty or whitespace (vectorised: each
    column is only looked at for the rows still blank so far)."""
    blank = np.ones(len(frame), dtype=bool)
    for name in frame.columns:
        rows = np.flatnonzero(blank)
        if not len(rows):
            break
        cells = frame[name].iloc[rows]
        codes, uniques = pd.factorize(cells, use_na_sentinel=True)
        empty = pd.Series(np.asarray(uniques, dtype=object)).astype(str).str.strip() == ""
        keep = np.where(codes < 0, True, empty.to_numpy()[np.maximum(codes, 0)])
        blank[rows] = keep
    return blank


def clean_text(column: pd.Series, lower: bool = False) -> pd.Series:
    """``column.str.strip()`` (and ``.str.lower()``), computed once per distinct cell
    text and mapped back: the same values, index and dtype."""
    codes, uniques = pd.factorize(column, use_na_sentinel=True)
    distinct = pd.Series(uniques, dtype=column.dtype).str.strip()
    if lower:
        distinct = distinct.str.lower()
    taken = distinct.take(np.maximum(codes, 0))
    taken.index = column.index
    if (codes < 0).any():
        taken = taken.where(codes >= 0, column.str.strip())
    return taken
