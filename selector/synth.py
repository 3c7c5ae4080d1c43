"""Synthetic parts libraries for the benchmark and for scale tests (invented data).

``python -m selector.synth N [--seed S] [--planted FILE] > big.csv`` writes N invented
op-amps with the columns of ``data/demo_library.csv``.  The figures are drawn per
family with the correlations of the trade (common practice, not any maker's data):
slew rate and quiescent current track GBW, voltage noise falls as supply current
rises, current noise follows the shot noise of the bias current, zero-drift parts have
micro-volt offset and nano-volt drift, CMOS and JFET inputs have pA bias, rail-to-rail
flags agree with the headroom figures.  Cells are written the ways people type them
(``2.4``, ``2.4MHz``, ``2.4 MHz``, ``2400 kHz``, ``1.2 V/µs``, ``1.2V/us``); a bare
number takes the unit in its column header.  A share of optional cells is empty.

``K`` near-duplicate keys are planted: a copy of an existing part under a key a
person would mistype or re-enter (a suffix letter, two digits swapped, a digit
added), with a figure or two changed.  The pairs go to ``--planted FILE`` (CSV
``key_a,key_b,kind``) and their count to stderr.  Output is the same for a seed.

Everything is vectorised with numpy: numbers are formatted once per distinct value.
"""
from __future__ import annotations

import argparse
import io
import sys
from dataclasses import dataclass

import numpy as np
import pandas as pd

from .library import Library, parse_library

SYNTHETIC_NOTE = "invented synthetic part"

# Invented key prefixes and makers (not any real maker's).
PREFIXES = ["ZQ", "QX", "XV", "JQ", "ZW", "VQX", "KZ", "WQ", "XJ", "QZV", "ZJ", "YQ",
            "XZW", "JZ", "QWX", "VZ", "ZY", "WXJ", "QJ", "XQZ"]
MAKERS = ["Zephyrine", "Quarrow Analog", "Vexmoor", "Jorvale", "Wyncliff", "Yelbrook"]

#: family name, weight and the medians / spreads of its figures (SI; common practice)
FAMILIES = pd.DataFrame.from_records([
    # name, weight, log10 gbw mean, sd, slew per gbw (V/s per Hz), iq at 1 MHz (A),
    # en at 1 mA (V/rtHz), vos median (V), drift per vos (1/degC), ib median (A),
    # en corner (Hz), aol mean (dB), cin_cm (F), ro (ohm), iout (A), cost base
    ("general-purpose bipolar", .22, 6.2, .35, .5, 1.2e-3, 26e-9, 800e-6, 4e-3, 50e-9,
     30, 108, 2e-12, 75, 25e-3, 0.35),
    ("zero-drift precision", .12, 6.0, .40, .5, 1e-4, 11e-9, 5e-6, 6e-3, 150e-12,
     0.1, 130, 5e-12, 200, 20e-3, 1.6),
    ("low-power CMOS RRIO", .30, 6.0, .70, .6, 7e-5, 7e-9, 1.5e-3, 1.3e-3, 2e-12,
     600, 105, 4e-12, 250, 25e-3, 0.40),
    ("wideband", .14, 8.1, .35, 1.2, 1.4e-4, 5.4e-9, 1.5e-3, 5e-3, 5e-6,
     2000, 92, 1.5e-12, 25, 80e-3, 1.5),
    ("low-noise JFET", .12, 7.1, .30, 1.4, 3.5e-4, 7.9e-9, 600e-6, 6e-3, 10e-12,
     100, 116, 10e-12, 50, 35e-3, 2.5),
    ("high-voltage", .10, 6.5, .35, 1.5, 5e-4, 19e-9, 1e-3, 5e-3, 15e-9,
     100, 115, 3e-12, 80, 40e-3, 3.0),
], columns=["name", "weight", "lgbw", "lgbw_sd", "slew_per_gbw", "iq_1mhz", "en_1ma",
            "vos", "drift_per_vos", "ib", "corner", "aol_db", "cin", "ro", "iout", "cost"])

# supply spans (min, max) in V per family, drawn uniformly
SUPPLIES = [
    [(10, 36), (6, 36), (3, 32), (4.5, 36)],
    [(1.8, 5.5), (2.7, 5.5), (2.2, 5.5), (4.5, 36)],
    [(1.8, 5.5), (2.5, 5.5), (2.7, 5.5), (1.6, 5.5), (2.7, 12)],
    [(4.5, 12), (2.7, 5.5), (5, 12)],
    [(10, 36), (9, 36), (8, 36)],
    [(10, 60), (10, 100), (8, 80), (10, 40)],
]
TEMPERATURES = np.array([(-40, 85), (-40, 125), (0, 70)], dtype=float)
PACKAGES = {1: ["SOT23-5", "SC70-5", "SOIC-8", "MSOP-8"],
            2: ["SOIC-8", "MSOP-8", "TSSOP-8", "DFN-8"],
            4: ["SOIC-14", "TSSOP-14"]}

#: header as in the demo library: column -> header unit (None: no unit)
HEADER = {
    "part": None, "maker": None, "family": None, "gbw": "MHz", "slew": "V/us",
    "supply_min": "V", "supply_max": "V", "swing_low": "mV", "swing_high": "mV",
    "cm_low": "V", "cm_high": "V", "rri": None, "rro": None, "vos": "uV",
    "vos_drift": "uV/C", "ib": "pA", "aol": "dB", "pm": "deg", "en": "nV/rtHz",
    "in": "fA/rtHz", "en_corner": "Hz", "cin_cm": "pF", "cin_diff": "pF", "ro": "ohm",
    "iout": "mA", "iq": "uA", "temp_min": "C", "temp_max": "C", "channels": None,
    "package": None, "status": None, "unit_cost": None, "stock": None, "notes": None,
}

#: ways a cell is typed: (scale of the written number in SI, text after the number).
#: The first entry is the bare number in the header's unit.
NOTATIONS: dict[str, list[tuple[float, str]]] = {
    "gbw": [(1e6, ""), (1e6, "MHz"), (1e6, " MHz"), (1e3, " kHz"), (1e3, "kHz")],
    "slew": [(1e6, ""), (1e6, " V/us"), (1e6, "V/us"), (1e6, " V/µs"), (1e3, " V/ms")],
    "supply_min": [(1.0, ""), (1.0, " V"), (1.0, "V")],
    "swing_low": [(1e-3, ""), (1e-3, " mV"), (1.0, " V")],
    "cm_low": [(1.0, ""), (1.0, " V"), (1e-3, " mV")],
    "vos": [(1e-6, ""), (1e-6, " uV"), (1e-6, "µV"), (1e-3, " mV")],
    "vos_drift": [(1e-6, ""), (1e-6, " uV/C"), (1e-6, " µV/°C"), (1e-9, " nV/C")],
    "ib": [(1e-12, ""), (1e-12, " pA"), (1e-9, " nA"), (1e-9, "nA")],
    "aol": [(1.0, ""), (1.0, " dB"), (1.0, "dB")],
    "pm": [(1.0, ""), (1.0, " deg"), (1.0, "°")],
    "en": [(1e-9, ""), (1e-9, " nV/rtHz"), (1e-9, " nV/√Hz"), (1e-9, "nV/sqrt(Hz)")],
    "in": [(1e-15, ""), (1e-15, " fA/rtHz"), (1e-12, " pA/√Hz")],
    "en_corner": [(1.0, ""), (1.0, " Hz"), (1.0, "Hz")],
    "cin_cm": [(1e-12, ""), (1e-12, " pF"), (1e-12, "pF")],
    "ro": [(1.0, ""), (1.0, " ohm"), (1.0, " Ω")],
    "iout": [(1e-3, ""), (1e-3, " mA"), (1e-3, "mA")],
    "iq": [(1e-6, ""), (1e-6, " uA"), (1e-6, " µA"), (1e-3, " mA")],
    "temp_min": [(1.0, ""), (1.0, " C"), (1.0, " °C")],
}
for _twin, _of in (("supply_max", "supply_min"), ("swing_high", "swing_low"),
                   ("cm_high", "cm_low"), ("cin_diff", "cin_cm"), ("temp_max", "temp_min")):
    NOTATIONS[_twin] = NOTATIONS[_of]
BARE_SHARE = 0.7  # share of cells written as a bare number under the header unit

#: share of empty cells in each optional column
MISSING = {"gbw": .01, "slew": .01, "swing_low": .02, "swing_high": .02, "cm_low": .02,
           "cm_high": .02, "vos": .01, "vos_drift": .05, "ib": .02, "aol": .04,
           "pm": .05, "en": .03, "in": .06, "en_corner": .06, "cin_cm": .06,
           "cin_diff": .08, "ro": .08, "iout": .03, "iq": .01, "package": .01,
           "unit_cost": .03, "stock": .05, "family": .02}

DIGITS = 3  # significant figures written


@dataclass
class Synthetic:
    """A generated library: ``cells`` (text, the CSV body), ``planted`` (key_a, key_b,
    kind: the original key and its near-duplicate) and ``values`` (one row per part, in
    file order: the SI figures before they were rounded to 3 significant figures and
    written as text; NaN where the cell is empty)."""

    cells: pd.DataFrame
    planted: pd.DataFrame
    values: pd.DataFrame

    def header(self) -> list[str]:
        return [f"{c} [{HEADER[c]}]" if HEADER[c] else c for c in self.cells.columns]

    def to_csv(self, out) -> None:
        """Write the library CSV to a path or an open text file."""
        frame = self.cells.copy()
        frame.columns = self.header()
        frame.to_csv(out, index=False, lineterminator="\n")

    def to_text(self) -> str:
        """The library CSV as text."""
        buffer = io.StringIO()
        self.to_csv(buffer)
        return buffer.getvalue()

    def to_library(self, source: str = "synthetic.csv") -> Library:
        """Parse the CSV text straight back into a (strictly loaded) Library."""
        return parse_library(self.to_text(), source)


def _lognormal(rng, median, sd_decades, size):
    return np.asarray(median) * 10.0 ** rng.normal(0.0, sd_decades, size)


def figures(n: int, rng: np.random.Generator) -> pd.DataFrame:
    """Draw the SI figures of ``n`` invented parts (one row each), vectorised."""
    fam_index = rng.choice(len(FAMILIES), size=n, p=FAMILIES["weight"].to_numpy())
    f = FAMILIES.iloc[fam_index].reset_index(drop=True)
    gbw = 10.0 ** rng.normal(f["lgbw"], f["lgbw_sd"])
    slew = gbw * _lognormal(rng, f["slew_per_gbw"], 0.15, n)
    iq = _lognormal(rng, f["iq_1mhz"], 0.2, n) * (gbw / 1e6) ** 0.8
    en = _lognormal(rng, f["en_1ma"], 0.1, n) * (iq / 1e-3) ** -0.45
    vos = _lognormal(rng, f["vos"], 0.3, n)
    drift = vos * _lognormal(rng, f["drift_per_vos"], 0.2, n)
    is_wide = fam_index == 3
    fet_wide = is_wide & (rng.random(n) < 0.2)  # FET-input wideband parts
    ib = np.where(fet_wide, _lognormal(rng, 10e-12, 0.3, n), _lognormal(rng, f["ib"], 0.3, n))
    in_ = np.sqrt(2 * 1.602176634e-19 * ib) * _lognormal(rng, 1.5, 0.15, n)  # shot noise
    corner = _lognormal(rng, f["corner"], 0.3, n)
    aol_db = np.round(np.clip(rng.normal(f["aol_db"], 4.0), 80, 150))  # whole dB
    pm = np.round(np.clip(rng.normal(58, 4, n), 40, 75))  # whole degrees

    supply_min, supply_max = np.empty(n), np.empty(n)
    pick = rng.random(n)
    for family, spans in enumerate(SUPPLIES):
        rows = fam_index == family
        choice = (pick[rows] * len(spans)).astype(int)
        table = np.array(spans, dtype=float)
        supply_min[rows], supply_max[rows] = table[choice, 0], table[choice, 1]

    rail_family = np.isin(fam_index, (1, 2))
    single_supply = (fam_index == 0) & (rng.random(n) < 0.2)  # PNP-input single-supply
    rro = rail_family | (is_wide & (rng.random(n) < 0.3)) | single_supply
    swing_low = np.where(rro, _lognormal(rng, 15e-3, 0.2, n), _lognormal(rng, 1.3, 0.06, n))
    swing_high = np.where(rro & ~single_supply, swing_low * _lognormal(rng, 1.0, 0.05, n),
                          _lognormal(rng, 1.3, 0.06, n))
    cm_base = np.array([2.0, -0.1, -0.1, 1.3, 3.0, 2.0])[fam_index]
    cm_low = np.where(single_supply, -0.2, cm_base * np.where(cm_base > 0,
                                                              _lognormal(rng, 1, .05, n), 1))
    cm_high = np.where(fam_index == 4, 0.5, cm_base) * np.where(
        cm_base > 0, _lognormal(rng, 1, 0.05, n), 1)
    rri = (cm_low < 0) & (cm_high < 0)

    cin_cm = _lognormal(rng, f["cin"], 0.15, n)
    cin_diff = cin_cm * _lognormal(rng, 1.5, 0.1, n)
    channels = rng.choice([1, 2, 4], size=n, p=[.45, .4, .15])
    package = np.empty(n, dtype=object)
    pick = rng.random(n)
    for count, names in PACKAGES.items():
        rows = channels == count
        package[rows] = np.array(names, dtype=object)[(pick[rows] * len(names)).astype(int)]
    temps = TEMPERATURES[rng.choice(3, size=n, p=[.5, .35, .15])]
    status = rng.choice(np.array(["active", "nrnd", "obsolete"], dtype=object), size=n,
                        p=[.85, .10, .05])
    precision = np.clip(1e-3 / vos, 0.3, 3) ** 0.3
    cost = np.maximum(0.05, np.round(_lognormal(rng, f["cost"], 0.12, n) * (gbw / 1e6) ** 0.1
                                     * precision * (1 + 0.3 * (channels - 1)), 2))
    stock = np.where(status == "obsolete", 0,
                     np.round(_lognormal(rng, 5000, 0.5, n), -2)).astype(np.int64)
    return pd.DataFrame({
        "maker": np.array(MAKERS, dtype=object)[rng.integers(0, len(MAKERS), n)],
        "family": f["name"].to_numpy(dtype=object), "gbw": gbw, "slew": slew,
        "supply_min": supply_min, "supply_max": supply_max, "swing_low": swing_low,
        "swing_high": swing_high, "cm_low": cm_low, "cm_high": cm_high, "rri": rri,
        "rro": rro, "vos": vos, "vos_drift": drift, "ib": ib, "aol": 10 ** (aol_db / 20),
        "pm": pm,
        "en": en, "in": in_, "en_corner": corner, "cin_cm": cin_cm, "cin_diff": cin_diff,
        "ro": _lognormal(rng, f["ro"], 0.15, n), "iout": _lognormal(rng, f["iout"], 0.1, n),
        "iq": iq, "temp_min": temps[:, 0], "temp_max": temps[:, 1], "channels": channels,
        "package": package, "status": status, "unit_cost": cost, "stock": stock,
    })


def keys(n: int, rng: np.random.Generator) -> np.ndarray:
    """``n`` distinct invented keys ``LETTERS-DIGITS`` (4 or 5 digits), distinct also
    after case, dashes and spaces are ignored."""
    per_prefix = 9000 + 90000  # 1000..9999 and 10000..99999
    space = len(PREFIXES) * per_prefix
    if n > space:
        raise ValueError(f"at most {space} distinct keys")
    code = rng.choice(space, size=n, replace=False)
    prefix, number = np.divmod(code, per_prefix)
    number = number + 1000
    return (pd.Series(np.array(PREFIXES, dtype=object)[prefix]) + "-"
            + pd.Series(number).astype(str)).to_numpy(dtype=object)


def _normal_key(values) -> np.ndarray:
    return pd.Series(values).str.lower().str.replace("-", "", regex=False).to_numpy()


def plant_duplicates(key: np.ndarray, count: int, rng: np.random.Generator):
    """Choose ``count`` source rows and a near-duplicate key for each.

    Returns (source positions, new keys, kinds).  A new key never equals any key after
    normalising (the loader would reject that as an exact duplicate)."""
    source = rng.choice(len(key), size=count, replace=False)
    base = pd.Series(key[source])
    kind = rng.choice(np.array(["suffix", "swap", "extra"], dtype=object), size=count,
                      p=[.5, .3, .2])
    letters = np.array(list("ABCRX"), dtype=object)[rng.integers(0, 5, count)]
    new = (base + letters).to_numpy(dtype=object)  # the suffix form, the fallback
    head, digits = base.str.rsplit("-", n=1).str[0], base.str.rsplit("-", n=1).str[1]
    swapped = digits.str[:-2] + digits.str[-1] + digits.str[-2]
    extra = digits + pd.Series(rng.integers(0, 10, count)).astype(str)
    candidates = np.where(kind == "swap", (head + "-" + swapped).to_numpy(dtype=object),
                          np.where(kind == "extra", (head + "-" + extra).to_numpy(dtype=object),
                                   new))
    normal = _normal_key(candidates)
    clash = (np.isin(normal, _normal_key(key)) | pd.Series(normal).duplicated().to_numpy()
             | (swapped == digits).to_numpy() & (kind == "swap"))
    candidates = np.where(clash, new, candidates)
    kind = np.where(clash, "suffix", kind)
    return source, candidates, kind


def _round_sig(values: np.ndarray, digits: int = DIGITS) -> np.ndarray:
    with np.errstate(divide="ignore", invalid="ignore"):
        exponent = np.floor(np.log10(np.abs(values)))
        factor = 10.0 ** (digits - 1 - np.where(np.isfinite(exponent), exponent, 0))
        return np.round(values * factor) / factor


def _text_of_numbers(numbers: np.ndarray) -> np.ndarray:
    """Positional text of each number, formatted once per distinct value."""
    unique, inverse = np.unique(numbers, return_inverse=True)
    text = np.array([np.format_float_positional(v, precision=DIGITS, unique=True,
                                                fractional=False, trim="-")
                     for v in unique], dtype=object)
    return text[inverse.ravel()]


def write_cells(name: str, si: np.ndarray, rng: np.random.Generator) -> np.ndarray:
    """Write one numeric column (SI floats, NaN = empty) in mixed notations."""
    n = len(si)
    notations = NOTATIONS[name]
    choice = np.where(rng.random(n) < BARE_SHARE, 0,
                      rng.integers(1, len(notations), n)) if len(notations) > 1 else np.zeros(n, int)
    scales = np.array([s for s, _ in notations])[choice]
    suffix = np.array([t for _, t in notations], dtype=object)[choice]
    if name == "aol":  # written in dB (the header's unit) either way
        with np.errstate(divide="ignore", invalid="ignore"):
            si, scales = 20 * np.log10(si), np.ones(n)
    shown = _round_sig(si / scales)
    text = _text_of_numbers(np.where(np.isnan(shown), 0.0, shown)) + suffix
    return np.where(np.isnan(si), "", text).astype(object)


def _flag_text(flags: np.ndarray, rng) -> np.ndarray:
    yes = np.array(["yes", "Yes", "y", "YES"], dtype=object)[rng.integers(0, 4, len(flags))]
    no = np.array(["no", "No", "n", "NO"], dtype=object)[rng.integers(0, 4, len(flags))]
    return np.where(flags, yes, no)


def generate(n: int, seed: int = 0, duplicates: int | None = None) -> Synthetic:
    """``n`` invented parts (``duplicates`` of them planted near-duplicates, default
    n // 500, at least 1 when n ≥ 2).  Deterministic for ``seed``."""
    if n < 1:
        raise ValueError("n must be at least 1")
    if duplicates is None:
        duplicates = max(1, n // 500) if n >= 2 else 0
    if not 0 <= duplicates <= n // 2:
        raise ValueError("duplicates must be between 0 and n/2")
    rng = np.random.default_rng(seed)
    base = n - duplicates
    values = figures(base, rng)
    key = keys(base, rng)
    source, new_key, kind = plant_duplicates(key, duplicates, rng)
    copies = values.iloc[source].reset_index(drop=True)
    nudge = rng.random(duplicates) < 0.5  # a re-entered row: one figure or two differ
    copies.loc[nudge, "vos"] = copies.loc[nudge, "vos"] * 1.2
    copies["unit_cost"] = np.round(copies["unit_cost"] * 1.05, 2)
    values = pd.concat([values, copies], ignore_index=True)
    source_key = key[source]
    key = np.concatenate([key, new_key])
    order = rng.permutation(n)  # the copies are spread through the file
    values, key = values.iloc[order].reset_index(drop=True), key[order]

    for name, share in MISSING.items():
        if name in ("package", "family"):
            continue
        gone = rng.random(n) < share
        values.loc[gone, name] = np.nan
    cells = {"part": key, "maker": values["maker"].to_numpy(),
             "family": np.where(rng.random(n) < MISSING["family"], "",
                                values["family"].to_numpy())}
    for name in HEADER:
        if name in NOTATIONS:
            cells[name] = write_cells(name, values[name].to_numpy(dtype=float), rng)
    cells["rri"] = _flag_text(values["rri"].to_numpy(), rng)
    cells["rro"] = _flag_text(values["rro"].to_numpy(), rng)
    cells["channels"] = values["channels"].astype(str).to_numpy(dtype=object)
    cells["package"] = np.where(rng.random(n) < MISSING["package"], "", values["package"])
    values["package"], values["family"] = cells["package"], cells["family"]
    cells["status"] = np.where(rng.random(n) < 0.1, pd.Series(values["status"]).str.upper(),
                               values["status"])
    cost = values["unit_cost"].to_numpy(dtype=float)
    cells["unit_cost"] = np.where(np.isnan(cost), "", _text_of_numbers(np.nan_to_num(cost)))
    stock = values["stock"].to_numpy(dtype=float)
    cells["stock"] = np.where(np.isnan(stock), "",
                              pd.Series(np.nan_to_num(stock)).astype(np.int64).astype(str))
    notes = np.where(rng.random(n) < 0.05, SYNTHETIC_NOTE, "").astype(object)
    notes[0] = "synthetic library: every part and figure is invented"
    cells["notes"] = notes
    frame = pd.DataFrame({name: cells[name] for name in HEADER})
    planted = pd.DataFrame({"key_a": source_key, "key_b": new_key, "kind": kind})
    return Synthetic(frame, planted, values.assign(part=key))


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(
        prog="python -m selector.synth",
        description="Write an invented parts library CSV to stdout.")
    parser.add_argument("n", type=int, help="number of parts")
    parser.add_argument("--seed", type=int, default=0, help="random seed (default 0)")
    parser.add_argument("--duplicates", type=int, default=None,
                        help="planted near-duplicate keys (default n/500)")
    parser.add_argument("--planted", metavar="CSV", default=None,
                        help="write the planted pairs (key_a,key_b,kind) to this file")
    args = parser.parse_args(argv)
    if args.n < 1:
        parser.error("n must be at least 1")
    try:
        result = generate(args.n, args.seed, args.duplicates)
    except ValueError as exc:
        parser.error(str(exc))
    result.to_csv(sys.stdout)
    if args.planted:
        result.planted.to_csv(args.planted, index=False, lineterminator="\n")
    print(f"synth: {args.n} parts, {len(result.planted)} planted near-duplicate keys",
          file=sys.stderr)
    return 0


if __name__ == "__main__":
    sys.exit(main())
