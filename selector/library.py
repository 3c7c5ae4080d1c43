"""The parts library: a user-maintained CSV of op-amp parameters, parsed to SI.

One row per part.  Headers are case-insensitive and may carry a unit in square
brackets (``gbw [MHz]``) that applies to bare numbers in that column; a cell may
carry its own unit instead (``2.4 MHz``).  Rows are numbered as in a spreadsheet:
the header is row 1, the first part is row 2.

``load_library`` returns a :class:`Library` whose ``table`` holds one float column
(SI) per numeric parameter, booleans as 1.0/0.0/NaN, and text columns as strings;
unknown columns are kept as text in ``extra``.
"""
from __future__ import annotations

import csv
import io
import re
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from .errors import InputError, Problem, ProblemList, UnitError
from .units import parse_column, resolve_unit


@dataclass(frozen=True)
class Column:
    """A known library column: its dimension and what reads it."""

    name: str
    dimension: str  # a units.DIMENSIONS key, or "text", "bool"
    required: bool = False
    doc: str = ""


COLUMNS: dict[str, Column] = {c.name: c for c in [
    Column("part", "text", True, "unique part key"),
    Column("maker", "text"),
    Column("family", "text"),
    Column("gbw", "Hz", doc="gain-bandwidth product"),
    Column("slew", "V/s", doc="slew rate"),
    Column("supply_min", "V", True, "minimum total supply span V+ − V−"),
    Column("supply_max", "V", True, "maximum total supply span V+ − V−"),
    Column("swing_low", "V", doc="output headroom needed above V−"),
    Column("swing_high", "V", doc="output headroom needed below V+"),
    Column("cm_low", "V", doc="input common-mode headroom above V− (negative: beyond)"),
    Column("cm_high", "V", doc="input common-mode headroom below V+ (negative: beyond)"),
    Column("rri", "bool", doc="rail-to-rail input"),
    Column("rro", "bool", doc="rail-to-rail output"),
    Column("vos", "V", doc="input offset voltage (magnitude)"),
    Column("vos_drift", "V/degC", doc="offset drift"),
    Column("ib", "A", doc="input bias current"),
    Column("aol", "ratio", doc="open-loop DC gain (dB or V/V in the header)"),
    Column("pm", "deg", doc="unity-gain phase margin"),
    Column("en", "V/rtHz", doc="input voltage noise density (white)"),
    Column("in", "A/rtHz", doc="input current noise density"),
    Column("en_corner", "Hz", doc="1/f corner of the voltage noise"),
    Column("cin_cm", "F", doc="common-mode input capacitance"),
    Column("cin_diff", "F", doc="differential input capacitance"),
    Column("ro", "ohm", doc="open-loop output resistance"),
    Column("iout", "A", doc="output current capability"),
    Column("iq", "A", doc="quiescent current per channel"),
    Column("temp_min", "degC"),
    Column("temp_max", "degC"),
    Column("channels", "count", doc="amplifiers per package"),
    Column("package", "text"),
    Column("status", "text", doc="active, nrnd or obsolete"),
    Column("unit_cost", "count", doc="price per part, any one currency"),
    Column("stock", "count"),
    Column("notes", "text"),
]}

NUMERIC = [c.name for c in COLUMNS.values() if c.dimension not in ("text", "bool")]
STATUSES = ("active", "nrnd", "obsolete")
_TRUE = {"yes", "y", "true", "1"}
_FALSE = {"no", "n", "false", "0"}
HEADER_RE = re.compile(r"^\s*([^\[\(]*?)\s*(?:[\[\(]\s*(.*?)\s*[\]\)])?\s*$")
MAX_FILE_BYTES = 200 * 1024 * 1024


@dataclass
class Library:
    """A parsed parts library.

    ``table``: one row per part, SI floats for numeric columns.  ``rows``: the
    spreadsheet row number of each part (header = 1).  ``problems``: what a lenient
    load found (empty after a strict load).  ``units``: header unit per column.
    """

    path: str
    table: pd.DataFrame
    rows: np.ndarray
    extra: list[str] = field(default_factory=list)
    units: dict[str, str | None] = field(default_factory=dict)
    problems: list[Problem] = field(default_factory=list)

    def __len__(self) -> int:
        return len(self.table)

    def column(self, name: str) -> np.ndarray:
        """A numeric column as a float array (NaN where missing or absent)."""
        if name in self.table:
            return self.table[name].to_numpy(dtype=float)
        return np.full(len(self.table), np.nan)


def normalise_key(keys: pd.Series) -> pd.Series:
    """Part keys compared without case, spaces, dashes, dots or underscores."""
    return keys.astype(str).str.lower().str.replace(r"[\s\-_./]+", "", regex=True)


def read_text(path: str | Path) -> str:
    """Read a text file, detecting UTF-8 (with or without BOM), UTF-16 and Latin-1."""
    path = Path(path)
    source = str(path)
    if not path.exists():
        raise InputError(f"{source}: no such file")
    if path.is_dir():
        raise InputError(f"{source}: is a directory, expected a file")
    try:
        if path.stat().st_size > MAX_FILE_BYTES:
            raise InputError(f"{source}: file is larger than {MAX_FILE_BYTES >> 20} MB")
        raw = path.read_bytes()
    except PermissionError:
        raise InputError(f"{source}: cannot be read (permission denied)") from None
    except OSError as exc:
        raise InputError(f"{source}: cannot be read ({exc.strerror})") from None
    if raw.startswith((b"\xff\xfe", b"\xfe\xff")):
        return raw.decode("utf-16")
    if raw.startswith(b"\xef\xbb\xbf"):
        raw = raw[3:]
    if b"\x00" in raw[:4096]:
        raise InputError(f"{source}: looks binary or UTF-16 without a byte-order mark; "
                         "save it as UTF-8 text")
    try:
        return raw.decode("utf-8")
    except UnicodeDecodeError:
        return raw.decode("latin-1")


def load_library(path: str | Path, strict: bool = True) -> Library:
    """Load and validate a parts library CSV.

    With ``strict`` (the default) any problem raises :class:`InputError` listing every
    problem found.  With ``strict=False`` unusable cells become missing and the
    problems are returned in ``Library.problems`` (the audit uses this); rows whose
    required fields are unusable are still kept, with NaN.
    """
    source = str(path)
    text = read_text(path)
    return parse_library(text, source, strict)


def parse_library(text: str, source: str = "<library>", strict: bool = True) -> Library:
    """Parse library CSV text (see :func:`load_library`)."""
    problems = ProblemList(source)
    header, frame = _read_csv(text, source)
    names, units = _parse_header(header, problems)
    problems.raise_if_any()
    frame.columns = names
    rows = np.arange(2, len(frame) + 2)
    keep = ~(frame.apply(lambda col: col.str.strip() == "").all(axis=1))
    frame, rows = frame[keep].reset_index(drop=True), rows[keep.to_numpy()]
    if frame.empty:
        raise InputError(f"{source}: no parts (the file has a header but no data rows)")

    table = pd.DataFrame(index=frame.index)
    for name in frame.columns:
        spec = COLUMNS.get(name)
        column = frame[name]
        if spec is None or spec.dimension == "text":
            table[name] = column.str.strip()
            continue
        if spec.dimension == "bool":
            table[name] = _parse_bool(column, name, rows, problems)
            continue
        values, errors = parse_column(column, spec.dimension, units.get(name),
                                      bare_ok=False)
        for index, message in errors.items():
            problems.add(f"row {rows[index]}, column '{name}'", message)
        table[name] = values
    _validate(table, rows, problems)
    if strict:
        problems.raise_if_any()
    extra = [n for n in table.columns if n not in COLUMNS]
    return Library(source, table, rows, extra, units, problems.problems)


def _read_csv(text: str, source: str) -> tuple[list[str], pd.DataFrame]:
    if not text.strip():
        raise InputError(f"{source}: file is empty")
    first_line = text.lstrip("\r\n").splitlines()[0]
    if first_line.count(";") > first_line.count(",") and first_line.count(";") >= 2:
        raise InputError(
            f"{source}, row 1: the file is semicolon-separated (a spreadsheet export "
            "with decimal commas?); save it as comma-separated with '.' as the decimal "
            "point")
    if "\t" in first_line and "," not in first_line:
        raise InputError(f"{source}, row 1: the file is tab-separated; save it as "
                         "comma-separated")
    reader = csv.reader(io.StringIO(text, newline=""))
    try:
        records = list(reader)
    except csv.Error as exc:
        raise InputError(f"{source}, row {reader.line_num}: {exc}") from None
    while records and not any(cell.strip() for cell in records[0]):
        records.pop(0)
    if not records:
        raise InputError(f"{source}: file is empty")
    header = records[0]
    while header and header[-1].strip() == "":
        header = header[:-1]
    width = len(header)
    body = []
    for number, record in enumerate(records[1:], start=2):
        while len(record) > width and record[-1].strip() == "":
            record = record[:-1]  # trailing separators
        if len(record) > width:
            raise InputError(f"{source}, row {number}: {len(record)} fields, but the "
                             f"header has {width}")
        body.append(record + [""] * (width - len(record)))
    frame = pd.DataFrame(body, columns=range(width), dtype="string").fillna("")
    return header, frame.astype(str)


def _parse_header(header: list[str], problems: ProblemList) -> tuple[list[str], dict]:
    names, units, seen = [], {}, {}
    for position, cell in enumerate(header, start=1):
        match = HEADER_RE.match(cell)
        name = (match.group(1) if match else cell).strip().lower().replace(" ", "_")
        unit = match.group(2) if match and match.group(2) else None
        if not name:
            problems.add(f"row 1, column {position}", "empty column name")
            name = f"column_{position}"
        if name in seen:
            problems.add(f"row 1, column '{name}'",
                         f"duplicate column (columns {seen[name]} and {position})")
        seen.setdefault(name, position)
        spec = COLUMNS.get(name)
        if unit and spec and spec.dimension in ("text", "bool"):
            problems.add(f"row 1, column '{name}'", f"a {name} column takes no unit")
        elif unit and spec:
            try:
                resolve_unit(unit, spec.dimension)
            except UnitError as exc:
                problems.add(f"row 1, column '{name}'", f"header unit: {exc}")
        names.append(name)
        units[name] = unit
    for spec in COLUMNS.values():
        if spec.required and spec.name not in seen:
            problems.add("row 1", f"missing required column '{spec.name}'")
    return names, units


def _parse_bool(column: pd.Series, name: str, rows: np.ndarray,
                problems: ProblemList) -> np.ndarray:
    text = column.str.strip().str.lower()
    values = np.where(text.isin(_TRUE), 1.0, np.where(text.isin(_FALSE), 0.0, np.nan))
    bad = ~(text.isin(_TRUE) | text.isin(_FALSE) | (text == ""))
    for index in np.flatnonzero(bad.to_numpy()):
        problems.add(f"row {rows[index]}, column '{name}'",
                     f"'{column.iloc[index]}' is not yes/no")
    return values


def _validate(table: pd.DataFrame, rows: np.ndarray, problems: ProblemList) -> None:
    """Required fields present, keys unique, values physically possible."""
    part = table["part"]
    for index in np.flatnonzero((part == "").to_numpy()):
        problems.add(f"row {rows[index]}, column 'part'", "missing part key")
    normal = normalise_key(part)
    duplicated = normal.duplicated(keep=False) & (part != "")
    for _, group in normal[duplicated].groupby(normal[duplicated]):
        first = group.index[0]
        for index in group.index[1:]:
            same = part[index] == part[first]
            how = "duplicate" if same else f"duplicate after normalising ('{part[first]}')"
            problems.add(f"row {rows[index]}, column 'part'",
                         f"{how} part key '{part[index]}' (first at row {rows[first]})")
    already = {p.where for p in problems.problems}
    for name in ("supply_min", "supply_max"):
        missing = np.isnan(table[name].to_numpy())
        for index in np.flatnonzero(missing):
            where = f"row {rows[index]}, column '{name}'"
            if where not in already:
                problems.add(where, "missing required value")
    positive = ["gbw", "slew", "supply_min", "supply_max", "aol", "cin_cm", "cin_diff",
                "ro", "iout", "iq", "en", "in", "en_corner"]
    for name in positive:
        if name not in table:
            continue
        values = table[name].to_numpy()
        bad = values < 0 if name in ("en_corner", "cin_cm", "cin_diff", "ro") else values <= 0
        for index in np.flatnonzero(bad):
            problems.add(f"row {rows[index]}, column '{name}'",
                         f"must be positive, got {values[index]:g} (SI)")
    if "pm" in table:
        values = table["pm"].to_numpy()
        for index in np.flatnonzero((values <= 0) | (values >= 180)):
            problems.add(f"row {rows[index]}, column 'pm'",
                         f"phase margin must be between 0 and 180°, got {values[index]:g}")
    span = table["supply_min"].to_numpy() >= table["supply_max"].to_numpy()
    for index in np.flatnonzero(span):
        problems.add(f"row {rows[index]}, column 'supply_min'",
                     "supply_min must be below supply_max")
    if "temp_min" in table and "temp_max" in table:
        flipped = table["temp_min"].to_numpy() >= table["temp_max"].to_numpy()
        for index in np.flatnonzero(flipped):
            problems.add(f"row {rows[index]}, column 'temp_min'",
                         "temp_min must be below temp_max")
    if "status" in table:
        status = table["status"].str.lower()
        table["status"] = status
        bad = ~status.isin(STATUSES + ("",))
        for index in np.flatnonzero(bad.to_numpy()):
            problems.add(f"row {rows[index]}, column 'status'",
                         f"'{table['status'].iloc[index]}' is not one of "
                         f"{', '.join(STATUSES)}")
