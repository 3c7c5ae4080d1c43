"""The brief: a TOML description of one sensor channel, parsed to SI.

Quantities are strings with units (``frequency = "20 kHz"``, ``rf = "9k09"``);
plain TOML numbers are accepted only for unitless keys (``channels``, ``gain``,
``margins``).  Every problem names its key as ``section.key``.
"""
from __future__ import annotations

import math
import tomllib
from dataclasses import dataclass
from pathlib import Path

from rapidfuzz import process

from .errors import InputError, Problem, UnitError
from .library import STATUSES, read_text
from .units import parse_quantity

TOPOLOGIES = ("follower", "non-inverting", "inverting")
WAVEFORMS = ("sine", "dc", "step")

# key -> dimension ("text", "int", "list", "gain" for a bare-or-dB ratio)
SCHEMA: dict[str, dict[str, str]] = {
    "": {"name": "text", "topology": "text", "channels": "int", "part": "text",
         "notes": "text"},
    "signal": {"min": "V", "max": "V", "frequency": "Hz", "waveform": "text",
               "source_resistance": "ohm"},
    "output": {"min": "V", "max": "V", "gain": "gain", "load_resistance": "ohm",
               "load_capacitance": "F"},
    "supply": {"positive": "V", "negative": "V"},
    "network": {"rf": "ohm", "rg": "ohm", "reference": "V", "stray_capacitance": "F"},
    "limits": {"gain_error": "fraction", "dc_error": "V", "noise": "V",
               "noise_bandwidth": "band", "phase_margin": "deg",
               "quiescent_current": "A", "temperature_min": "degC",
               "temperature_max": "degC", "settling_time": "s",
               "settling_error": "fraction"},
    "margins": {"slew": "gain", "gbw": "gain"},
    "filters": {"status": "list", "packages": "list", "max_unit_cost": "count"},
}


@dataclass
class Brief:
    """One channel's requirements, all in SI.  ``None`` means not given."""

    name: str
    topology: str
    signal_min: float
    signal_max: float
    supply_positive: float
    supply_negative: float = 0.0
    frequency: float = 0.0
    waveform: str = "dc"
    source_resistance: float = 0.0
    output_min: float | None = None
    output_max: float | None = None
    gain: float | None = None
    load_resistance: float = math.inf
    load_capacitance: float = 0.0
    rf: float | None = None
    rg: float | None = None
    reference: float | None = None
    stray_capacitance: float = 0.0
    gain_error: float = 0.01
    dc_error: float | None = None
    noise: float | None = None
    noise_band: tuple[float, float] | None = None
    phase_margin: float = 45.0
    quiescent_current: float | None = None
    temperature_min: float | None = None
    temperature_max: float | None = None
    settling_time: float | None = None
    settling_error: float | None = None
    slew_margin: float = 1.0
    gbw_margin: float = 1.0
    status: tuple[str, ...] = ("active",)
    packages: tuple[str, ...] | None = None
    max_unit_cost: float | None = None
    channels: int = 1
    part: str | None = None
    notes: str = ""
    source: str = "<brief>"

    @property
    def supply_span(self) -> float:
        return self.supply_positive - self.supply_negative


def load_brief(path: str | Path) -> Brief:
    """Read and validate a brief file; raises :class:`InputError` naming the key."""
    source = str(path)
    text = read_text(path)
    return parse_brief(text, source)


def parse_brief(text: str, source: str = "<brief>") -> Brief:
    """Parse brief TOML text (see :func:`load_brief`)."""
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"{source}: invalid TOML: {exc}") from None
    return brief_from_dict(data, source)


def brief_from_dict(data: dict, source: str = "<brief>") -> Brief:
    """Validate a brief given as nested dicts (as from TOML)."""
    problems: list[Problem] = []
    values = _read_values(data, source, problems)
    if problems:
        raise InputError(problems)
    brief = _build(values, source, problems)
    if problems:
        raise InputError(problems)
    return brief


def _read_values(data: dict, source: str, problems: list[Problem]) -> dict:
    values: dict[str, object] = {}
    for key, value in data.items():
        if isinstance(value, dict):
            if key not in SCHEMA or key == "":
                problems.append(Problem(source, f"[{key}]",
                                        "unknown section" + _did_you_mean(key, SCHEMA)))
                continue
            for subkey, subvalue in value.items():
                _read_one(f"{key}.{subkey}", key, subkey, subvalue, source, problems, values)
        else:
            _read_one(key, "", key, value, source, problems, values)
    return values


def _read_one(full: str, section: str, key: str, value, source: str,
              problems: list[Problem], values: dict) -> None:
    schema = SCHEMA[section]
    if key not in schema:
        where = f"key '{full}'"
        problems.append(Problem(source, where, "unknown key" + _did_you_mean(key, schema)))
        return
    kind = schema[key]
    where = f"key '{full}'"
    try:
        values[full] = _convert(value, kind)
    except (UnitError, ValueError, TypeError) as exc:
        problems.append(Problem(source, where, str(exc)))


def _convert(value, kind: str):
    if kind == "text":
        if not isinstance(value, str):
            raise TypeError(f"expected text, got {_type_name(value)}")
        return value.strip()
    if kind == "int":
        if isinstance(value, bool) or not isinstance(value, int):
            raise TypeError(f"expected a whole number, got {_type_name(value)}")
        if value < 1:
            raise ValueError(f"must be at least 1, got {value}")
        return value
    if kind == "list":
        items = [value] if isinstance(value, str) else value
        if not isinstance(items, list) or not all(isinstance(i, str) for i in items):
            raise TypeError("expected a list of text, e.g. [\"active\", \"nrnd\"]")
        return tuple(i.strip() for i in items)
    if kind == "band":
        if isinstance(value, list):
            if len(value) != 2:
                raise ValueError("give one upper frequency or [low, high]")
            low, high = (parse_quantity(v, "Hz") for v in value)
            if not 0 < low < high:
                raise ValueError("needs 0 < low < high")
            return (low, high)
        high = parse_quantity(value, "Hz")
        if high <= 0:
            raise ValueError("must be above 0 Hz")
        return (None, high)
    if kind == "gain":
        number = parse_quantity(value, "ratio", bare_ok=True)
        return number
    if kind == "count":
        return parse_quantity(value, "count")
    if isinstance(value, bool) or not isinstance(value, (str, int, float)):
        raise TypeError(f"expected a quantity with its unit, got {_type_name(value)}")
    if isinstance(value, (int, float)):
        if not math.isfinite(value):  # TOML nan / inf
            raise UnitError(f"{value!r} is not a finite number")
        if value == 0:
            return 0.0
        raise UnitError(f"{value!r} has no unit; write it as a string with its unit, "
                        f"e.g. \"{value} {_EXAMPLE_UNIT.get(kind, kind)}\"")
    return parse_quantity(value, kind)


_EXAMPLE_UNIT = {"V": "V", "Hz": "kHz", "ohm": "kohm", "F": "pF", "A": "mA",
                 "deg": "deg", "degC": "C", "s": "us", "fraction": "%"}


def _type_name(value) -> str:
    return {bool: "true/false", int: "a number", float: "a number", str: "text",
            list: "a list", dict: "a table"}.get(type(value), type(value).__name__)


def _did_you_mean(key: str, options) -> str:
    candidates = [o for o in options if o]
    if not candidates:
        return ""
    best = process.extractOne(key, candidates, score_cutoff=60)
    return f" (did you mean '{best[0]}'?)" if best else ""


def _build(v: dict, source: str, problems: list[Problem]) -> Brief:
    def need(key: str):
        if key not in v:
            problems.append(Problem(source, f"key '{key}'", "missing required key"))
        return v.get(key)

    def fail(key: str, message: str) -> None:
        problems.append(Problem(source, f"key '{key}'", message))

    name = v.get("name") or Path(source).stem
    topology = need("topology")
    if topology is not None and topology not in TOPOLOGIES:
        fail("topology", f"'{topology}' is not one of {', '.join(TOPOLOGIES)}"
             + _did_you_mean(topology, TOPOLOGIES))
    x_lo, x_hi = need("signal.min"), need("signal.max")
    v_pos = need("supply.positive")
    v_neg = v.get("supply.negative", 0.0)
    if problems:
        return None  # type: ignore[return-value]
    if x_lo >= x_hi:
        fail("signal.min", f"signal.min ({x_lo:g} V) must be below signal.max ({x_hi:g} V)")
    if v_pos <= v_neg:
        fail("supply.positive", f"supply.positive ({v_pos:g} V) must be above "
             f"supply.negative ({v_neg:g} V)")
    frequency = v.get("signal.frequency")
    waveform = v.get("signal.waveform")
    if waveform is not None and waveform not in WAVEFORMS:
        fail("signal.waveform", f"'{waveform}' is not one of {', '.join(WAVEFORMS)}")
    if frequency is None:
        frequency = 0.0
        waveform = waveform or "dc"
        if waveform == "sine":
            fail("signal.frequency", "a sine signal needs a frequency")
    elif frequency < 0:
        fail("signal.frequency", f"must be positive, got {frequency:g} Hz")
    elif frequency == 0:
        if waveform not in (None, "dc", "step"):
            fail("signal.frequency", "a sine signal needs a frequency above 0 Hz "
                 "(use waveform = \"dc\" for a DC channel)")
        waveform = waveform or "dc"
    else:
        waveform = waveform or "sine"
    if waveform == "dc" and frequency > 0:
        fail("signal.waveform", "a DC signal has no frequency; remove signal.frequency")
    for key in ("signal.source_resistance",):
        if key in v and v[key] < 0:
            fail(key, f"must not be negative, got {v[key]:g} Ω")
    for key in ("network.rf", "network.rg", "output.load_resistance"):
        if key in v and v[key] <= 0:
            fail(key, f"must be above 0 Ω, got {v[key]:g} Ω")
    for key in ("output.load_capacitance", "network.stray_capacitance"):
        if key in v and v[key] < 0:
            fail(key, f"must not be negative, got {v[key]:g} F")
    for key in ("limits.dc_error", "limits.noise", "limits.quiescent_current",
                "limits.settling_time"):
        if key in v and v[key] <= 0:
            fail(key, f"must be above 0, got {v[key]:g}")
    for key in ("limits.gain_error", "limits.settling_error"):
        if key in v and not 0 < v[key] < 1:
            fail(key, f"must be between 0 and 100 %, got {v[key] * 100:g} %")
    if "limits.phase_margin" in v and not 0 < v["limits.phase_margin"] < 180:
        fail("limits.phase_margin", "must be between 0 and 180°")
    for key in ("margins.slew", "margins.gbw"):
        if key in v and v[key] < 1:
            fail(key, f"a margin is a factor ≥ 1, got {v[key]:g}")
    t_lo, t_hi = v.get("limits.temperature_min"), v.get("limits.temperature_max")
    if (t_lo is None) != (t_hi is None):
        fail("limits.temperature_min" if t_lo is None else "limits.temperature_max",
             "give both limits.temperature_min and limits.temperature_max")
    elif t_lo is not None and t_lo > t_hi:
        fail("limits.temperature_min", "temperature_min must not exceed temperature_max")
    for status in v.get("filters.status", ()):
        if status not in STATUSES:
            fail("filters.status", f"'{status}' is not one of {', '.join(STATUSES)}")
    if "filters.max_unit_cost" in v and v["filters.max_unit_cost"] <= 0:
        fail("filters.max_unit_cost", "must be above 0")
    if waveform == "step" and "limits.settling_time" not in v:
        fail("limits.settling_time", "a step brief needs a settling time")
    y_lo, y_hi, gain = v.get("output.min"), v.get("output.max"), v.get("output.gain")
    if (y_lo is None) != (y_hi is None):
        fail("output.min" if y_lo is None else "output.max",
             "give both output.min and output.max (or output.gain)")
    if y_lo is not None and y_hi is not None and y_lo >= y_hi:
        fail("output.min", f"output.min ({y_lo:g} V) must be below output.max ({y_hi:g} V)")
    has_network = "network.rf" in v and "network.rg" in v
    if y_lo is None and gain is None and topology != "follower" and not has_network:
        fail("output.min", "give output.min and output.max, output.gain, or "
             "network.rf and network.rg")
    if y_lo is not None and gain is not None:
        fail("output.gain", "give either output.gain or output.min/max, not both")
    band = v.get("limits.noise_bandwidth")
    if problems:
        return None  # type: ignore[return-value]
    return Brief(
        name=name, topology=topology, signal_min=x_lo, signal_max=x_hi,
        supply_positive=v_pos, supply_negative=v_neg, frequency=frequency,
        waveform=waveform, source_resistance=v.get("signal.source_resistance", 0.0),
        output_min=y_lo, output_max=y_hi, gain=gain,
        load_resistance=v.get("output.load_resistance", math.inf),
        load_capacitance=v.get("output.load_capacitance", 0.0),
        rf=v.get("network.rf"), rg=v.get("network.rg"),
        reference=v.get("network.reference"),
        stray_capacitance=v.get("network.stray_capacitance", 0.0),
        gain_error=v.get("limits.gain_error", 0.01), dc_error=v.get("limits.dc_error"),
        noise=v.get("limits.noise"), noise_band=band,
        phase_margin=v.get("limits.phase_margin", 45.0),
        quiescent_current=v.get("limits.quiescent_current"),
        temperature_min=t_lo, temperature_max=t_hi,
        settling_time=v.get("limits.settling_time"),
        settling_error=v.get("limits.settling_error"),
        slew_margin=v.get("margins.slew", 1.0), gbw_margin=v.get("margins.gbw", 1.0),
        status=v.get("filters.status", ("active",)), packages=v.get("filters.packages"),
        max_unit_cost=v.get("filters.max_unit_cost"), channels=v.get("channels", 1),
        part=v.get("part"), notes=v.get("notes", ""), source=source,
    )

