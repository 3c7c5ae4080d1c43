"""The benchmark's SQL versions: the closed-form checks as one query.

The query is built from the engine's own ``Requirements`` (every derived figure is a
constant in the query; the resistance the + input sees is worked out from the
network's resistor values by ``bench_reference.plus_resistance``) and runs over the
parsed parts table (SI floats, NULL where a figure is missing) in in-memory
``sqlite3`` or in DuckDB.  NULL propagation gives
the engine's rule for free: a comparison with a missing figure is not true, so a part
with an "unknown" check never qualifies.

Closed-form checks only: supply, slew, gain accuracy, output swing, input common
mode, DC error, noise, temperature, quiescent current, output drive and the status,
package and cost filters.  The loop-gain phase margin needs a root find per part and
is left out; the benchmark compares against the engine restricted to the same checks
(``bench_reference.engine_qualifying``).  Step briefs (settling) are not supported.
"""
from __future__ import annotations

import math
import sqlite3

import numpy as np
import pandas as pd

from bench_reference import plus_resistance
from selector import checks as engine_checks
from selector.relations import BOLTZMANN, DEFAULT_NOISE_LOW_HZ, ROOM_KELVIN

COLUMNS = ("gbw", "slew", "supply_min", "supply_max", "swing_low", "swing_high",
           "cm_low", "cm_high", "vos", "vos_drift", "ib", "aol", "en", "in", "en_corner",
           "iout", "iq", "temp_min", "temp_max", "unit_cost")


def _c(value: float) -> str:
    """A float constant, exactly (repr round-trips), parenthesised."""
    value = float(value)
    if not math.isfinite(value):
        raise ValueError(f"constant {value} cannot go into the query")
    text = repr(value)
    if "e" not in text and "." not in text:
        text += ".0"
    return f"({text})"


def _text_list(values) -> str:
    return "(" + ", ".join("'" + v.replace("'", "''") + "'" for v in values) + ")"


def parts_frame(library) -> pd.DataFrame:
    """The columns the query reads: part, status and package as text (lower case),
    numeric figures as floats (NaN becomes NULL in the database)."""
    table = library.table
    frame = pd.DataFrame({name: library.column(name) for name in COLUMNS})
    frame.insert(0, "part", table["part"].astype(str).to_numpy(dtype=object))
    for name in ("status", "package"):
        if name in table:
            frame[name] = table[name].fillna("").astype(str).str.lower().to_numpy(
                dtype=object)
        else:
            frame[name] = ""
    return frame


def closed_form_query(req, table: str = "parts") -> str:
    """One SELECT of the parts passing every closed-form check of ``req``."""
    brief = req.brief
    if brief.waveform == "step":
        raise NotImplementedError("the SQL version has no settling check")
    ng = req.noise_gain
    where: list[str] = []
    span = req.supply_span
    where.append(f"({_c(span)} - supply_min) >= 0 AND ((-{_c(span)}) - (-supply_max)) >= 0")
    if req.slew_min is not None:
        where.append(f"slew / {_c(req.slew_min)} >= 1")
    if req.frequency > 0 and brief.waveform == "sine":
        k = float((1 - np.asarray(brief.gain_error)) ** -2)
        real = f"(CASE WHEN aol IS NULL THEN 1.0 ELSE 1 + {_c(ng)} / aol END)"
        room = f"({_c(k)} - {real} * {real})"
        ngf = float(ng * np.asarray(req.frequency))
        where.append(f"{room} > 0 AND gbw / (({_c(ngf)} / sqrt({room})) * "
                     f"{_c(brief.gbw_margin)}) >= 1")
    else:
        where.append(f"aol / {_c(req.aol_min)} >= 1")
    y_lo, y_hi = req.output_range
    where.append(f"({_c(y_lo - brief.supply_negative)} - swing_low) >= 0 AND "
                 f"({_c(brief.supply_positive - y_hi)} - swing_high) >= 0")
    cm_lo, cm_hi = req.input_common_mode
    where.append(f"({_c(cm_lo - brief.supply_negative)} - cm_low) >= 0 AND "
                 f"({_c(brief.supply_positive - cm_hi)} - cm_high) >= 0")
    if req.dc_error_budget is not None:
        where.append(_dc_error(req))
    if req.noise_budget is not None:
        where.append(_noise(req))
    if req.temperature is not None:
        t_lo, t_hi = req.temperature
        where.append(f"({_c(t_lo)} - temp_min) >= 0 AND "
                     f"((-{_c(t_hi)}) - (-temp_max)) >= 0")
    if brief.quiescent_current is not None:
        actual = f"(iq * {_c(brief.channels)})"
        where.append(f"({actual} = 0 OR {_c(brief.quiescent_current)} / {actual} >= 1)")
    current = engine_checks.load_current(req)
    if current > 0:
        where.append(f"iout / {_c(current)} >= 1")
    where.append(f"status IN {_text_list(brief.status)}")
    if brief.packages:
        where.append(f"package IN {_text_list([p.lower() for p in brief.packages])}")
    if brief.max_unit_cost is not None:
        where.append(f"unit_cost <= {_c(brief.max_unit_cost)}")
    source = _band_source(req, table)
    return f"SELECT part FROM {source} WHERE " + "\n  AND ".join(f"({w})" for w in where)


def _band_source(req, table: str) -> str:
    """The table, with the upper edge ``fh`` of the noise band added when needed."""
    if req.noise_budget is None:
        return table
    band = req.brief.noise_band
    low = band[0] if band is not None and band[0] is not None else DEFAULT_NOISE_LOW_HZ
    enbw = f"({_c(math.pi / 2)} * (gbw / {_c(req.noise_gain)}))"
    if band is None:
        high = enbw
    else:
        edge = _c(band[1])
        capped = f"(CASE WHEN gbw IS NULL THEN {edge} WHEN {enbw} < {edge} THEN {enbw} " \
                 f"ELSE {edge} END)"
        high = f"(CASE WHEN {capped} > {_c(low)} THEN {capped} ELSE {_c(low)} END)"
    return f"(SELECT *, {high} AS fh FROM {table}) AS banded"


def _dc_error(req) -> str:
    """METHOD §4, with the engine's rule for which figures are needed."""
    r_plus = plus_resistance(req)  # Rs, (R1 + Rs) ∥ R2, or an inverting stage's Ra ∥ Rb
    needs_drift = req.delta_t > 0
    needs_ib = req.rf > 0 or r_plus > 0
    drift = "abs(vos_drift)" if needs_drift else "abs(coalesce(vos_drift, 0.0))"
    ib = "abs(ib)" if needs_ib else "abs(coalesce(ib, 0.0))"
    source_term = f"{ib} * {_c(r_plus)}"
    error = (f"({_c(req.noise_gain)} * (abs(vos) + {drift} * {_c(req.delta_t)} + "
             f"{source_term}) + {ib} * {_c(req.rf)})")
    present = ["vos IS NOT NULL"]
    if needs_drift:
        present.append("vos_drift IS NOT NULL")
    if needs_ib:
        present.append("ib IS NOT NULL")
    return " AND ".join(present) + (f" AND ({error} = 0 OR "
                                    f"{_c(req.dc_error_budget)} / {error} >= 1)")


def _noise(req) -> str:
    """METHOD §5 over the band [f_low, fh] (``fh`` from :func:`_band_source`)."""
    band = req.brief.noise_band
    low = band[0] if band is not None and band[0] is not None else DEFAULT_NOISE_LOW_HZ
    req_r = req.feedback_parallel
    source = plus_resistance(req)  # the resistance at the + input
    resistive = source > 0 or req_r > 0
    thermal = 4 * BOLTZMANN * ROOM_KELVIN * (source + req_r)
    spread = source ** 2 + req_r ** 2
    current = '"in"' if resistive else 'coalesce("in", 0.0)'
    fl = _c(low)
    power = (f"(en * en * ((fh - {fl}) + en_corner * ln(fh / {fl})) + "
             f"({_c(thermal)} + {current} * {current} * {_c(spread)}) * (fh - {fl}))")
    rms = f"({_c(req.noise_gain)} * sqrt({power}))"
    present = ["en IS NOT NULL", "en_corner IS NOT NULL", "fh IS NOT NULL"]
    if resistive:
        present.append('"in" IS NOT NULL')
    return " AND ".join(present) + f" AND ({rms} = 0 OR {_c(req.noise_budget)} / {rms} >= 1)"


# ------------------------------------------------------------------ databases
def sqlite_database(frame: pd.DataFrame) -> sqlite3.Connection:
    """An in-memory sqlite3 database holding ``frame`` as table ``parts``."""
    connection = sqlite3.connect(":memory:")
    numeric = [c for c in frame.columns if c not in ("part", "status", "package")]
    columns = ", ".join(['part TEXT', 'status TEXT', 'package TEXT']
                        + [f'"{c}" REAL' for c in numeric])
    connection.execute(f"CREATE TABLE parts ({columns})")
    ordered = frame[["part", "status", "package"] + numeric]
    rows = ordered.astype(object).where(ordered.notna(), None).itertuples(index=False,
                                                                          name=None)
    marks = ", ".join("?" * ordered.shape[1])
    connection.executemany(f"INSERT INTO parts VALUES ({marks})", rows)
    connection.commit()
    return connection


def sqlite_qualifying(connection: sqlite3.Connection, req) -> list[str]:
    return [row[0] for row in connection.execute(closed_form_query(req))]


def duckdb_database(frame: pd.DataFrame):
    """A DuckDB in-memory database holding ``frame`` as table ``parts`` (None when
    DuckDB, the optional ``bench`` extra, is not installed)."""
    try:
        import duckdb
    except ImportError:
        return None
    connection = duckdb.connect(":memory:")
    connection.register("frame_view", frame)
    connection.execute("CREATE TABLE parts AS SELECT * FROM frame_view")
    connection.unregister("frame_view")
    return connection


def duckdb_qualifying(connection, req) -> list[str]:
    return [row[0] for row in connection.execute(closed_form_query(req)).fetchall()]
