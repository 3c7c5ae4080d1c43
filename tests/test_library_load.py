"""The parts library: values in SI (checked against pint), and every bad input
through the command line → a message naming file, row and column, exit status 2,
no traceback.  All parts are invented."""
from __future__ import annotations

import math

import pint
import pytest

from selector.library import load_library, parse_library

from conftest import BASIC_BRIEF, DEMO_LIBRARY

UREG = pint.UnitRegistry()

HEADER = "part,gbw [MHz],slew [V/us],supply_min [V],supply_max [V],rri,status,vos"
GOOD_ROWS = ["ZT-4410,3.5,2.5,4.5,36,no,active,800 uV",
             "ZT-4420,900 kHz,0.5 V/µs,1.8,5.5,yes,nrnd,2 mV"]


def table(header=HEADER, rows=GOOD_ROWS) -> str:
    return "\n".join([header, *rows]) + "\n"


def test_header_and_cell_units_agree_with_pint():
    lib = parse_library(table())
    t = lib.table
    # source: pint conversions of the same figures
    assert t["gbw"].tolist() == pytest.approx(
        [UREG.Quantity("3.5 MHz").to("Hz").m, UREG.Quantity("900 kHz").to("Hz").m])
    assert t["slew"].tolist() == pytest.approx(
        [UREG.Quantity("2.5 V/us").to("V/s").m, UREG.Quantity("0.5 V/us").to("V/s").m])
    assert t["vos"].tolist() == pytest.approx([800e-6, 2e-3])
    assert t["rri"].tolist() == [0.0, 1.0]
    assert list(lib.rows) == [2, 3]                  # spreadsheet rows, header = row 1
    assert math.isnan(lib.column("en")[0])           # absent column → missing


def test_headers_are_case_insensitive_and_extra_columns_kept():
    lib = parse_library(table(header=HEADER.replace("gbw", "GBW") + ",bin_location",
                              rows=[r + ",shelf 4" for r in GOOD_ROWS]))
    assert lib.table["gbw"][0] == pytest.approx(3.5e6)
    assert lib.extra == ["bin_location"]
    assert lib.table["bin_location"][0] == "shelf 4"


BAD_LIBRARIES = [
    # (description, csv text, location named, fragment)
    ("bare number, no unit anywhere",
     table(header=HEADER.replace("gbw [MHz]", "gbw")), "row 2, column 'gbw'", "no unit"),
    ("wrong dimension", table(rows=["ZT-4410,3.5,3 MHz,4.5,36,no,active,1 mV"]),
     "row 2, column 'slew'", "expected slew rate"),
    ("bad header unit", table(header=HEADER.replace("[MHz]", "[parsecs]")),
     "row 1, column 'gbw'", "unknown unit"),
    ("missing part column", table(header=HEADER.replace("part,", "name,")),
     "row 1", "missing required column 'part'"),
    ("missing supply cell", table(rows=[GOOD_ROWS[0], "ZT-4420,1,1,1.8,,no,active,1 mV"]),
     "row 3, column 'supply_max'", "missing required value"),
    ("duplicate key", table(rows=[GOOD_ROWS[0], GOOD_ROWS[0]]),
     "row 3, column 'part'", "duplicate part key 'ZT-4410' (first at row 2)"),
    ("duplicate after normalising",
     table(rows=[GOOD_ROWS[0], GOOD_ROWS[1].replace("ZT-4420", "zt 4410")]),
     "row 3, column 'part'", "duplicate after normalising"),
    ("negative GBW", table(rows=["ZT-4410,-3.5,2.5,4.5,36,no,active,1 mV"]),
     "row 2, column 'gbw'", "must be positive"),
    ("supply_min >= supply_max", table(rows=["ZT-4410,3.5,2.5,36,36,no,active,1 mV"]),
     "row 2, column 'supply_min'", "supply_min must be below supply_max"),
    ("bad yes/no", table(rows=["ZT-4410,3.5,2.5,4.5,36,maybe,active,1 mV"]),
     "row 2, column 'rri'", "'maybe' is not yes/no"),
    ("bad status", table(rows=["ZT-4410,3.5,2.5,4.5,36,no,retired,1 mV"]),
     "row 2, column 'status'", "'retired' is not one of active, nrnd, obsolete"),
]


@pytest.mark.parametrize("text, where, fragment", [c[1:] for c in BAD_LIBRARIES],
                         ids=[c[0] for c in BAD_LIBRARIES])
def test_bad_library_exits_2(cli, write, text, where, fragment):
    library = write("parts.csv", text)
    brief = write("brief.toml", BASIC_BRIEF)
    before = library.read_bytes()
    code, out, err = cli("shortlist", brief, "--library", library)
    assert code == 2
    assert out == ""
    assert "Traceback" not in err
    assert err.startswith("selector: error: ")
    assert f"{library}, {where}" in err          # file, row and column
    assert fragment in err
    assert library.read_bytes() == before        # the library is never written


def test_every_problem_is_reported_at_once(write):
    text = table(rows=["ZT-4410,-3.5,3 MHz,4.5,36,maybe,active,1 mV",
                       "ZT-4410,1,1,5,4,no,retired,1 mV"])
    with pytest.raises(Exception) as caught:
        load_library(write("many.csv", text))
    message = str(caught.value)
    for where in ("row 2, column 'gbw'", "row 2, column 'slew'", "row 2, column 'rri'",
                  "row 3, column 'part'", "row 3, column 'supply_min'",
                  "row 3, column 'status'"):
        assert where in message


def test_demo_library_loads():
    lib = load_library(DEMO_LIBRARY)
    assert len(lib) >= 60
    assert set(lib.table["status"]) == {"active", "nrnd", "obsolete"}
