"""The parts library: a user-maintained CSV of op-amp parameters, parsed to SI.

One row per part.  Headers are case-insensitive and may carry a unit in square
brackets (``gbw [MHz]``) that applies to bare numbers in that column; a cell may
carry its own unit instead (``2.4 MHz``).

Header unit versus cell unit: a cell unit of the same dimension overrides the
header unit (``2400 kHz`` under ``gbw [MHz]`` is 2.4 MHz).  The cell states its own
unit explicitly, so reading it any other way would be a silent guess, and rejecting
it would make users strip correct units from pasted figures; the header unit is only
the default for bare numbers.  A cell unit of another dimension (``3 uA`` under
``gbw [MHz]``) is an error naming the row and column.

Hostile files: UTF-8 with or without a byte-order mark, UTF-16 with one, and
Latin-1 for anything that is not valid UTF-8 are read; NUL bytes, semicolon- or
tab-separated files, unbalanced quotes, rows wider than the header and cells over
128 k characters are errors naming the row (and column where known).

Rows are numbered as in a spreadsheet: the header is row 1 (after any blank rows
above it), the first part is row 2, and a quoted cell with line breaks is one row.

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
from .fastcsv import blank_rows, clean_text, read_plain
from .units import format_si, parse_column, resolve_unit


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
    return keys.astype(str).str.lower().str.translate(_KEY_IGNORED)


# what normalise_key drops: Unicode whitespace (as the regex class \s; none lies above
# U+3000) and - _ . / ; str.translate is faster than a regex over 10⁵ keys
_KEY_IGNORED = dict.fromkeys([c for c in range(0x3001) if chr(c).isspace()]
                             + [ord(c) for c in "-_./"])


def read_text(path: str | Path) -> str:
    """Read a text file, detecting UTF-8 (with or without BOM), UTF-16 and Latin-1.

    Reads at most :data:`MAX_FILE_BYTES` (so ``/dev/zero`` or a runaway export
    cannot exhaust memory); a pipe such as ``<(cat parts.csv)`` works.
    """
    path = Path(path)
    source = str(path)
    try:
        if path.is_dir():
            raise InputError(f"{source}: is a directory, expected a file")
        if not path.exists():
            raise InputError(f"{source}: no such file")
        with path.open("rb") as stream:
            raw = stream.read(MAX_FILE_BYTES + 1)
    except PermissionError:
        raise InputError(f"{source}: cannot be read (permission denied)") from None
    except OSError as exc:
        raise InputError(f"{source}: cannot be read ({exc.strerror or exc})") from None
    if len(raw) > MAX_FILE_BYTES:
        raise InputError(f"{source}: file is larger than {MAX_FILE_BYTES >> 20} MB")
    return decode(raw, source)


def decode(raw: bytes, source: str = "<file>") -> str:
    """Bytes to text: UTF-16 with a byte-order mark, UTF-8 (a BOM is dropped), else
    Latin-1 (ISO 8859-1, where every byte is a character: the common encoding of
    older spreadsheet exports, so a ``µ`` in a unit reads as ``µ``)."""
    if raw.startswith((b"\xff\xfe", b"\xfe\xff")):
        try:
            return raw.decode("utf-16")
        except UnicodeDecodeError as exc:
            raise InputError(f"{source}: starts with a UTF-16 byte-order mark but is not "
                             f"valid UTF-16 (byte {exc.start}: {exc.reason}); save it "
                             "again as UTF-8 text") from None
    if raw.startswith(b"\xef\xbb\xbf"):
        raw = raw[3:]
    if b"\x00" in raw:
        position = raw.index(b"\x00")
        raise InputError(f"{source}: contains a NUL byte (byte {position}): it looks "
                         "binary or UTF-16 without a byte-order mark; save it as UTF-8 "
                         "text")
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
    text = text.removeprefix("\ufeff")  # a BOM left by reading with encoding="utf-8"
    header, frame, header_row = _read_csv(text, source)
    names, units = _parse_header(header, problems, header_row)
    problems.raise_if_any()
    frame.columns = names
    rows = np.arange(header_row + 1, len(frame) + header_row + 1)
    keep = ~blank_rows(frame)
    frame, rows = frame[keep].reset_index(drop=True), rows[keep]
    if frame.empty:
        raise InputError(f"{source}: no parts (the file has a header but no data rows)")

    table = pd.DataFrame(index=frame.index)
    for name in frame.columns:
        spec = COLUMNS.get(name)
        column = frame[name]
        if spec is None or spec.dimension == "text":
            table[name] = clean_text(column)
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


MAX_CELL_CHARS = 131072  # the csv module's default field limit; longer is not a part


def shown(text: str, limit: int = 40) -> str:
    """A cell as quoted in a message: control characters escaped, long text cut."""
    text = text.encode("unicode_escape").decode("ascii") if not text.isprintable() else text
    return text if len(text) <= limit else text[:limit - 3] + "..."


_FIRST_LINE_RE = re.compile("[^\n\r\x0b\x0c\x1c\x1d\x1e\x85\u2028\u2029]*")


def _read_csv(text: str, source: str) -> tuple[list[str], pd.DataFrame, int]:
    """Split CSV text into header and body; returns them and the row number of the
    header (1 unless blank rows come first).  Rows are counted as records, as a
    spreadsheet shows them (a quoted cell with line breaks stays one row)."""
    if not text.strip():
        raise InputError(f"{source}: file is empty")
    stripped = text.lstrip("\r\n")
    first_line = _FIRST_LINE_RE.match(stripped).group()  # = splitlines()[0], no full split
    first_row = text[:len(text) - len(stripped)].count("\n") + 1
    if first_line.count(";") > first_line.count(",") and first_line.count(";") >= 2:
        raise InputError(
            f"{source}, row {first_row}: the file is semicolon-separated (a spreadsheet export "
            "with decimal commas?); save it as comma-separated with '.' as the decimal "
            "point")
    if "\t" in first_line and "," not in first_line:
        raise InputError(f"{source}, row {first_row}: the file is tab-separated; save it as "
                         "comma-separated")
    plain = read_plain(text)  # quote-free table: pandas' C parser, same cells
    if plain is not None:
        return plain[0], plain[1], 1
    # strict: a stray or unclosed quote is an error, never a silently glued cell
    reader = csv.reader(io.StringIO(text, newline=""), strict=True)
    records: list[list[str]] = []
    try:
        for record in reader:
            records.append(record)
    except csv.Error as exc:
        raise InputError(_csv_problem(source, exc, len(records) + 1, reader.line_num,
                                      text)) from None
    skipped = 0
    while records and not any(cell.strip() for cell in records[0]):
        records.pop(0)
        skipped += 1
    if not records:
        raise InputError(f"{source}: file is empty")
    header_row = skipped + 1
    header = records[0]
    while header and header[-1].strip() == "":
        header = header[:-1]
    width = len(header)
    body = []
    for number, record in enumerate(records[1:], start=header_row + 1):
        while len(record) > width and record[-1].strip() == "":
            record = record[:-1]  # trailing separators
        if len(record) > width:
            hint = (" (an unquoted comma inside a value, such as a decimal comma "
                    "'1,5'? quote it or use '.' as the decimal point)")
            raise InputError(f"{source}, row {number}: {len(record)} fields, but the "
                             f"header has {width}{hint}")
        body.append(record + [""] * (width - len(record)))
    frame = pd.DataFrame(body, columns=range(width), dtype="string").fillna("")
    return header, frame.astype(str), header_row


def _csv_problem(source: str, exc: csv.Error, row: int, line: int, text: str) -> str:
    message = str(exc)
    if "field larger than field limit" in message:
        column = _long_cell_column(text, line)
        where = f"row {row}" + (f", column {column}" if column else "")
        return (f"{source}, {where}: a cell longer than {MAX_CELL_CHARS} characters; "
                "this does not look like a parts table")
    if "unexpected end of data" in message:
        return (f"{source}, row {row}: a quoted cell is never closed (a missing '\"'); "
                "the file ends inside it")
    if "expected" in message and "after" in message:
        return (f"{source}, row {row} (line {line}): a quote inside a cell must be "
                f"doubled, or the whole cell quoted ({message})")
    return f"{source}, row {row} (line {line}): {message}"


def _long_cell_column(text: str, line: int) -> int | None:
    """1-based column of the over-long cell on physical ``line`` (best effort)."""
    lines = text.splitlines()
    if not 0 < line <= len(lines):
        return None
    fields = lines[line - 1].split(",")
    longest = max(range(len(fields)), key=lambda i: len(fields[i]))
    return longest + 1 if len(fields[longest]) > MAX_CELL_CHARS else None


def _parse_header(header: list[str], problems: ProblemList,
                  row: int = 1) -> tuple[list[str], dict]:
    names, units, seen = [], {}, {}
    for position, cell in enumerate(header, start=1):
        match = HEADER_RE.match(cell)
        name = (match.group(1) if match else cell).strip().lower().replace(" ", "_")
        unit = match.group(2) if match and match.group(2) else None
        if not name:
            problems.add(f"row {row}, column {position}", "empty column name")
            name = f"column_{position}"
        if name in seen:
            problems.add(f"row {row}, column '{name}'",
                         f"duplicate column (columns {seen[name]} and {position})")
        seen.setdefault(name, position)
        spec = COLUMNS.get(name)
        if unit and spec and spec.dimension in ("text", "bool"):
            problems.add(f"row {row}, column '{name}'", f"a {name} column takes no unit")
        elif unit and spec:
            try:
                resolve_unit(unit, spec.dimension)
            except UnitError as exc:
                problems.add(f"row {row}, column '{name}'", f"header unit: {exc}")
        names.append(name)
        units[name] = unit
    for spec in COLUMNS.values():
        if spec.required and spec.name not in seen:
            problems.add(f"row {row}", f"missing required column '{spec.name}'")
    return names, units


def _parse_bool(column: pd.Series, name: str, rows: np.ndarray,
                problems: ProblemList) -> np.ndarray:
    text = clean_text(column, lower=True)
    values = np.where(text.isin(_TRUE), 1.0, np.where(text.isin(_FALSE), 0.0, np.nan))
    bad = ~(text.isin(_TRUE) | text.isin(_FALSE) | (text == ""))
    for index in np.flatnonzero(bad.to_numpy()):
        problems.add(f"row {rows[index]}, column '{name}'",
                     f"'{shown(column.iloc[index])}' is not yes/no")
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
        values = table[name].to_numpy(dtype=float, copy=True)
        zero_ok = name in ("en_corner", "cin_cm", "cin_diff", "ro")
        bad = values < 0 if zero_ok else values <= 0
        for index in np.flatnonzero(bad):
            problems.add(f"row {rows[index]}, column '{name}'",
                         ("must not be negative, got " if zero_ok else "must be positive, got ")
                         + format_si(values[index], COLUMNS[name].dimension))
        _blank(table, name, bad)
    if "pm" in table:
        values = table["pm"].to_numpy(dtype=float)
        bad = (values <= 0) | (values >= 180)
        for index in np.flatnonzero(bad):
            problems.add(f"row {rows[index]}, column 'pm'",
                         f"phase margin must be between 0 and 180°, got {values[index]:g}")
        _blank(table, "pm", bad)
    # order checks only between figures that are valid on their own
    span = table["supply_min"].to_numpy() >= table["supply_max"].to_numpy()
    for index in np.flatnonzero(span):
        problems.add(f"row {rows[index]}, column 'supply_min'",
                     "supply_min must be below supply_max")
    _blank(table, "supply_min", span)
    _blank(table, "supply_max", span)
    if "temp_min" in table and "temp_max" in table:
        flipped = table["temp_min"].to_numpy() >= table["temp_max"].to_numpy()
        for index in np.flatnonzero(flipped):
            problems.add(f"row {rows[index]}, column 'temp_min'",
                         "temp_min must be below temp_max")
        _blank(table, "temp_min", flipped)
        _blank(table, "temp_max", flipped)
    if "status" in table:
        status = table["status"].str.lower()
        table["status"] = status
        bad = ~status.isin(STATUSES + ("",))
        for index in np.flatnonzero(bad.to_numpy()):
            problems.add(f"row {rows[index]}, column 'status'",
                         f"'{shown(table['status'].iloc[index])}' is not one of "
                         f"{', '.join(STATUSES)}")


def _blank(table: pd.DataFrame, name: str, bad: np.ndarray) -> None:
    """A figure that failed validation is missing in a lenient load, never used."""
    if bad.any():
        values = table[name].to_numpy(dtype=float, copy=True)
        values[bad] = np.nan
        table[name] = values
