"""Gain networks from standard resistor values (method §7, §5, §6).

- IEC 60063 preferred-number series E6 … E192 and the IEC 60062 resistor code
  (``4k7``) formatter; :func:`selector.units.parse_resistor_code` reads codes back.
- :func:`pair_candidates`: every (Rf, Rg) pair of a series over the decades nearest a
  wanted ratio, with nominal and worst-case gain error (method §7).
- :func:`level_effects`: what the impedance level does, per candidate: network and
  load current at full swing, power in each resistor, resistor noise, bias-current
  error, feedback pole with the input capacitance, crossover and phase margin with a
  part, and the feedback capacitor Cf = Rg·C_in/Rf (rounded to E12) that restores it.
- :func:`choose_pair`: the candidate whose worst normalised effect is smallest.
- :func:`monte_carlo`: gain-error spread for resistors uniform within tolerance.

All values SI (Ω, F, Hz, A, W, V, V/√Hz); arrays have one element per candidate.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from . import relations as rel
from .errors import InputError

# ------------------------------------------------------------ IEC 60063 series
# Two-figure series as the standard lists them (they are not all the rounding of
# 10^(i/n): E24 has 2.7, 3.0, 3.3, 3.6, 3.9, 4.3, 4.7 and 8.2 where the rule gives
# 2.6, 2.9, 3.2, 3.5, 3.8, 4.2, 4.6 and 8.3).
_TWO_FIGURE = {
    6: (1.0, 1.5, 2.2, 3.3, 4.7, 6.8),
    12: (1.0, 1.2, 1.5, 1.8, 2.2, 2.7, 3.3, 3.9, 4.7, 5.6, 6.8, 8.2),
    24: (1.0, 1.1, 1.2, 1.3, 1.5, 1.6, 1.8, 2.0, 2.2, 2.4, 2.7, 3.0, 3.3, 3.6, 3.9,
         4.3, 4.7, 5.1, 5.6, 6.2, 6.8, 7.5, 8.2, 9.1),
}
# Three-figure series follow round(10^(i/n), 2) except where listed here.
_THREE_FIGURE_EXCEPTIONS = {192: {185: 9.20}}  # the rule gives 9.19
SERIES_NAMES = ("E6", "E12", "E24", "E48", "E96", "E192")
#: usual tolerance of each series (common practice), as a fraction
SERIES_TOLERANCE = {"E6": 0.2, "E12": 0.1, "E24": 0.05, "E48": 0.02, "E96": 0.01,
                    "E192": 0.005}


def decade(series: str) -> np.ndarray:
    """The mantissas of ``series`` ("E24" …) in [1, 10) as a float array."""
    n = _series_number(series)
    if n in _TWO_FIGURE:
        return np.array(_TWO_FIGURE[n])
    values = np.round(10.0 ** (np.arange(n) / n), 2)
    for index, value in _THREE_FIGURE_EXCEPTIONS.get(n, {}).items():
        values[index] = value
    return values


def _series_number(series: str) -> int:
    text = str(series).strip().upper()
    if text not in SERIES_NAMES:
        raise InputError(f"series '{series}' is not one of {', '.join(SERIES_NAMES)}")
    return int(text[1:])


def values(series: str, low: float = 1.0, high: float = 10e6) -> np.ndarray:
    """Every value (Ω) of ``series`` from ``low`` to ``high`` inclusive, ascending."""
    mantissa = decade(series)
    exponents = np.arange(math.floor(math.log10(low)) - 1, math.ceil(math.log10(high)) + 1)
    grid = (mantissa[None, :] * 10.0 ** exponents[:, None]).ravel()
    grid = np.round(grid, 12 - int(math.log10(high)))
    return grid[(grid >= low * (1 - 1e-9)) & (grid <= high * (1 + 1e-9))]


def nearest(wanted, grid: np.ndarray) -> np.ndarray:
    """The value of the ascending ``grid`` nearest each ``wanted`` in ratio (log)."""
    wanted = np.asarray(wanted, dtype=float)
    right = np.clip(np.searchsorted(grid, wanted), 1, len(grid) - 1)
    below, above = grid[right - 1], grid[right]
    return np.where(np.abs(np.log(wanted / below)) <= np.abs(np.log(above / wanted)),
                    below, above)


# ------------------------------------------------------------ IEC 60062 codes
_CODE_LETTERS = ((1e9, "G"), (1e6, "M"), (1e3, "k"), (1.0, "R"))


def resistor_code(value: float, digits: int = 3) -> str:
    """IEC 60062 code as written on a drawing: 4700 → ``4k7``, 4.7 → ``4R7``,
    0.47 → ``R47``, 100 → ``100R``, 1000 → ``1k0``, 9090 → ``9k09`` (Ω in)."""
    value = float(value)
    if not math.isfinite(value) or value <= 0:
        raise ValueError(f"no resistor code for {value!r} Ω")
    scale, letter = next(((s, c) for s, c in _CODE_LETTERS if value >= s * 0.9999995),
                         (1.0, "R"))
    number = f"{value / scale:.{digits}g}"
    if "e" in number:  # e.g. 1e+03 cannot happen below the next letter, but be safe
        number = f"{value / scale:.0f}"
    whole, _, fraction = number.partition(".")
    fraction = fraction.rstrip("0")
    if whole == "0":
        whole = ""
    if not fraction and len(whole) == 1:
        fraction = "0"  # 1k0, 4R0: the letter never ends a one-figure code
    return f"{whole}{letter}{fraction}"


def capacitor_nearest_e12(value) -> np.ndarray:
    """Nearest E12 capacitor value (F) to each ``value`` (F); NaN/inf kept."""
    value = np.asarray(value, dtype=float)
    grid = _e12_capacitors()
    ok = np.isfinite(value) & (value > 0)
    out = np.full(value.shape, np.nan)
    out[ok] = nearest(value[ok], grid)
    return out


def _e12_capacitors() -> np.ndarray:
    exponents = np.arange(-15, -2)
    return np.round((decade("E12")[None, :] * 10.0 ** exponents[:, None]).ravel(), 18)


# ------------------------------------------------------------ the part
@dataclass(frozen=True)
class PartFigures:
    """The figures of one part the network depends on (SI; NaN when unknown)."""

    key: str | None = None
    en: float = math.nan
    in_: float = math.nan
    ib: float = math.nan
    vos: float = math.nan
    cin: float = math.nan
    iout: float = math.nan
    gbw: float = math.nan
    aol: float = math.nan
    pm: float = math.nan
    ro: float = math.nan
    swing_low: float = math.nan
    swing_high: float = math.nan
    slew: float = math.nan
    cin_cm: float = math.nan
    cin_diff: float = math.nan

    @classmethod
    def from_row(cls, row: pd.Series) -> "PartFigures":
        def get(name):
            value = row.get(name, math.nan)
            try:
                return float(value)
            except (TypeError, ValueError):
                return math.nan
        cin = get("cin_cm") + get("cin_diff")
        return cls(key=str(row.get("part")), en=get("en"), in_=get("in"), ib=get("ib"),
                   vos=get("vos"), cin=cin, iout=get("iout"), gbw=get("gbw"),
                   aol=get("aol"), pm=get("pm"), ro=get("ro"),
                   swing_low=get("swing_low"), swing_high=get("swing_high"),
                   slew=get("slew"), cin_cm=get("cin_cm"), cin_diff=get("cin_diff"))


#: figures assumed when no part is given (a typical general-purpose part; stated in
#: every output that uses them)
TYPICAL = PartFigures(key=None, en=10e-9, in_=1e-12, ib=math.nan, vos=math.nan,
                      cin=5e-12, iout=10e-3, gbw=10e6, aol=math.inf, pm=60.0,
                      ro=math.nan)
DRIVE_SHARE = 0.1        # the network may take a tenth of the part's drive
NOISE_SHARE = 0.5        # resistor noise below half the part's en (adds ≤ 12 %)
BIAS_SHARE = 0.25        # Ib·Rf below a quarter of the DC budget (or NG·Vos)
RESISTOR_POWER = 6.25e-3  # W: a tenth of a small chip resistor's rating
MC_SEED = 60063
MC_DRAWS = 10_000
RG_RANGE = (10.0, 1e6)   # Ω, the Rg decades searched


# ------------------------------------------------------------ pair search
def pair_candidates(ratio: float, series: str = "E96", tolerance: float | None = None,
                    source: float = 0.0, topology: str = "non-inverting",
                    rg_range: tuple[float, float] = RG_RANGE) -> pd.DataFrame:
    """Every Rg of ``series`` in ``rg_range`` with the standard Rf nearest
    ``ratio``·(Rg + ``source``).  ``ratio`` is Rf/(Rg + Rs): NG − 1 for the
    non-inverting stage (Rs = 0), |G| for the inverting one.

    Columns: rg, rf (Ω), ratio (realised), gain (realised, signed), error (nominal
    relative gain error), worst (worst-case relative gain error at ``tolerance``, §7).
    """
    if not ratio > 0 or not math.isfinite(ratio):
        raise InputError(f"cannot build a resistor ratio of {ratio:g}")
    t = SERIES_TOLERANCE[series.upper()] if tolerance is None else tolerance
    grid = values(series, 0.1, 100e6)
    rg = grid[(grid >= rg_range[0]) & (grid <= rg_range[1])]
    rf = nearest(ratio * (rg + source), grid)
    frame = pd.DataFrame({"rg": rg, "rf": rf})
    frame["ratio"] = rf / (rg + source)
    wanted = _gain(ratio, 1.0, 1.0, 0.0, topology)
    frame["gain"] = _gain(rf, rg, 1.0, source, topology)
    frame["error"] = frame["gain"] / wanted - 1
    high = _gain(rf * (1 + t), rg * (1 - t), 1.0, source, topology)
    low = _gain(rf * (1 - t), rg * (1 + t), 1.0, source, topology)
    frame["worst"] = np.maximum(np.abs(high / wanted - 1), np.abs(low / wanted - 1))
    frame.attrs.update(series=series.upper(), tolerance=t, wanted=wanted)
    return frame


def _gain(rf, rg, scale, source, topology):
    """Gain of the stage for resistor arrays (non-inverting 1 + Rf/Rg, else −Rf/(Rg+Rs))."""
    rf, rg = np.asarray(rf, dtype=float) * scale, np.asarray(rg, dtype=float)
    if topology == "inverting":
        return -rf / (rg + source)
    return 1 + rf / rg


def worst_case_gain(rf, rg, tolerance, topology="non-inverting", source=0.0):
    """(G_min, G_max) at resistor tolerance ``tolerance`` (fraction), method §7."""
    a = _gain(np.asarray(rf) * (1 + tolerance), np.asarray(rg) * (1 - tolerance), 1.0,
              source, topology)
    b = _gain(np.asarray(rf) * (1 - tolerance), np.asarray(rg) * (1 + tolerance), 1.0,
              source, topology)
    return np.minimum(a, b), np.maximum(a, b)


def monte_carlo(rf, rg, wanted_gain, tolerance, topology="non-inverting", source=0.0,
                draws: int = MC_DRAWS, seed: int = MC_SEED):
    """Relative gain error of each (rf, rg) with both resistors uniform within
    ±``tolerance``: returns (0.5 %, 99.5 %) quantiles — the 99 % interval — and the
    standard deviation, one element per candidate.  Fixed seed: same answer each run.
    """
    rf, rg = np.atleast_1d(np.asarray(rf, dtype=float)), np.atleast_1d(np.asarray(rg, dtype=float))
    rng = np.random.default_rng(seed)
    u = rng.uniform(-tolerance, tolerance, size=(2, draws))
    gain = _gain(rf[:, None] * (1 + u[0]), rg[:, None] * (1 + u[1]), 1.0, source, topology)
    wanted = np.broadcast_to(np.asarray(wanted_gain, dtype=float), rf.shape)[:, None]
    error = gain / wanted - 1
    low, high = np.quantile(error, [0.005, 0.995], axis=1)
    return low, high, error.std(axis=1)


# ------------------------------------------------------------ loop with a general β
def feedback_factor(frequency, rf, rg_side, cin, cf=0.0):
    """β(jf) = Zg/(Zg + Zf) with Zg = rg_side ∥ C_in and Zf = Rf ∥ Cf (complex)."""
    s = 2j * np.pi * np.asarray(frequency, dtype=float)
    yg = 1 / np.asarray(rg_side, dtype=float) + s * np.asarray(cin, dtype=float)
    yf = 1 / np.asarray(rf, dtype=float) + s * np.asarray(cf, dtype=float)
    return yf / (yf + yg)


def _amplifier(frequency, part: PartFigures, load_pole=math.inf, load_factor=1.0):
    """A(jf)·H2(jf)·HL(jf): single-pole A (method §2) times the second pole from pm
    and the output stage into its load (method §6): ``load_factor`` = R'/(R' + Ro)
    and ``load_pole`` = 1/(2π·(Ro ∥ R')·C_L), R' the resistive load (arrays allowed)."""
    f = np.asarray(frequency, dtype=float)
    aol = part.aol if math.isfinite(part.aol) else np.inf
    value = rel.open_loop(f, part.gbw, aol)
    if math.isfinite(part.pm):
        value = value / (1 + 1j * f / rel.second_pole(part.gbw, part.pm))
    return value * np.asarray(load_factor) / (1 + 1j * f / np.asarray(load_pole, dtype=float))


def loop_margin(part: PartFigures, rf, rg_side, cin, cf=0.0, load_pole=math.inf,
                iterations: int = 48, load_factor=1.0):
    """Crossover (Hz) and phase margin (°) of L = A·H2·HL·β, vectorised over the
    candidates (bisection on log f; |L| falls with f).  180° where |L| < 1 at 1 mHz."""
    rf = np.atleast_1d(np.asarray(rf, dtype=float))
    shape = rf.shape
    rg_side, cin, cf = (np.broadcast_to(np.asarray(x, dtype=float), shape)
                        for x in (rg_side, cin, cf))

    def loop(f):
        return (_amplifier(f, part, load_pole, load_factor)
                * feedback_factor(f, rf, rg_side, cin, cf))

    low, high = np.full(shape, -3.0), np.full(shape, 12.0)
    never = np.abs(loop(10.0 ** low)) < 1
    for _ in range(iterations):
        middle = (low + high) / 2
        above = np.abs(loop(10.0 ** middle)) > 1
        low, high = np.where(above, middle, low), np.where(above, high, middle)
    crossing = 10.0 ** ((low + high) / 2)
    # phase as a sum of each factor's own angle, so it never wraps
    aol = part.aol if math.isfinite(part.aol) else np.inf
    phase = np.angle(rel.open_loop(crossing, part.gbw, aol), deg=True)
    if math.isfinite(part.pm):
        phase = phase - np.degrees(np.arctan(crossing / rel.second_pole(part.gbw, part.pm)))
    phase = phase - np.degrees(np.arctan(crossing / np.asarray(load_pole, dtype=float)))
    phase = phase + np.angle(feedback_factor(crossing, rf, rg_side, cin, cf), deg=True)
    return np.where(never, np.nan, crossing), np.where(never, 180.0, 180.0 + phase)


def closed_loop(frequency, part: PartFigures, topology, rf, rg, source=0.0, cin=0.0,
                cf=0.0, load_pole=math.inf, cin_diff=0.0, load_factor=1.0):
    """Closed-loop gain vo/vin (complex) of the stage, by nodal analysis at the −
    input with Y = 1/(Rg+Rs) + jωC_in + 1/Zf (C_in includes ``cin_diff``):
    non-inverting A·H·(1 − jωC_diff/Y)/(1 + A·H·β) — the + input drives the
    capacitance between the inputs — and inverting −A·H·(1/(Rg+Rs))/Y/(1 + A·H·β).
    ``frequency`` broadcasts against the resistors."""
    f = np.asarray(frequency, dtype=float)
    rg_side = rg + source if topology == "inverting" else rg
    amp = _amplifier(f, part, load_pole, load_factor)
    beta = feedback_factor(f, rf, rg_side, cin, cf)
    s = 2j * np.pi * f
    y = 1 / rg_side + s * cin + 1 / rf + s * cf
    if topology != "inverting":
        return amp * (1 - s * cin_diff / y) / (1 + amp * beta)
    return -amp * (1 / rg_side) / y / (1 + amp * beta)


def bandwidth_3db(part: PartFigures, topology, rf, rg, source=0.0, cin=0.0, cf=0.0,
                  load_pole=math.inf, iterations: int = 40, cin_diff=0.0,
                  load_factor=1.0) -> np.ndarray:
    """First frequency (Hz) where |A_cl| falls 3 dB below its value at 1 Hz,
    vectorised over candidates.  Peaking above the low-frequency gain is passed over
    by scanning a log grid before the bisection."""
    rf = np.atleast_1d(np.asarray(rf, dtype=float))
    rg = np.broadcast_to(np.asarray(rg, dtype=float), rf.shape)
    cf = np.broadcast_to(np.asarray(cf, dtype=float), rf.shape)
    load_pole = np.broadcast_to(np.asarray(load_pole, dtype=float), rf.shape)
    load_factor = np.broadcast_to(np.asarray(load_factor, dtype=float), rf.shape)
    ref = np.abs(closed_loop(1.0, part, topology, rf, rg, source, cin, cf, load_pole,
                             cin_diff, load_factor))
    grid = np.logspace(0, 11, 221)
    mag = np.abs(closed_loop(grid[:, None], part, topology, rf[None, :], rg[None, :],
                             source, cin, cf[None, :], load_pole[None, :], cin_diff,
                             load_factor[None, :]))
    below = mag < ref[None, :] / math.sqrt(2)
    first = np.where(below.any(axis=0), below.argmax(axis=0), len(grid) - 1)
    low, high = np.log10(grid[np.maximum(first - 1, 0)]), np.log10(grid[first])
    for _ in range(iterations):
        middle = (low + high) / 2
        m = np.abs(closed_loop(10.0 ** middle, part, topology, rf, rg, source, cin, cf,
                               load_pole, cin_diff, load_factor))
        fell = m < ref / math.sqrt(2)
        low, high = np.where(fell, low, middle), np.where(fell, middle, high)
    return np.where(below.any(axis=0), 10.0 ** ((low + high) / 2), np.nan)


# ------------------------------------------------------------ impedance level
@dataclass
class Stage:
    """What the level effects need to know about the stage (SI)."""

    topology: str
    noise_gain: float
    output_range: tuple[float, float]   # V
    input_range: tuple[float, float]    # V, at the source
    network_end: float = 0.0            # V at the far end of Rg (reference or ground)
    source: float = 0.0                 # Ω, Rs
    load_resistance: float = math.inf   # Ω
    load_capacitance: float = 0.0       # F
    stray: float = 0.0                  # F, added to C_in
    phase_margin_min: float = 45.0      # °
    dc_budget: float | None = None      # V
    bandwidth_needed: float | None = None  # Hz, closed-loop


def level_effects(candidates: pd.DataFrame, stage: Stage, part: PartFigures) -> pd.DataFrame:
    """Add the impedance-level effects to ``candidates`` (rf, rg columns), vectorised.

    New columns: i_network (A, peak into Rf+Rg at full swing), i_total (A, with the
    load), p_rf, p_rg (W, peak), req (Ω), noise_resistors (V/√Hz at the output:
    NG·sqrt(4kT·Req + (in·Req)²)), noise_amp (NG·en), bias_error (V, |Ib|·Rf),
    f_fb (Hz), crossover (Hz), pm (°), cf (F, E12, NaN when not needed),
    f_cf (Hz, 1/(2π·Rf·Cf)), pm_cf (°), bw (Hz, −3 dB), bw_cf (Hz, with Cf), and the
    normalised figures drive, noise, bias, stability and the worst of them, ``figure``.
    """
    out = candidates.copy()
    rf, rg = out["rf"].to_numpy(float), out["rg"].to_numpy(float)
    ng, rs = stage.noise_gain, stage.source
    inverting = stage.topology == "inverting"
    rg_side = rg + rs if inverting else rg
    excursion = max(abs(y - stage.network_end) for y in stage.output_range)
    if inverting:
        i_net = excursion / rf
        p_rf = excursion ** 2 / rf
        far = max(abs(x - stage.network_end) for x in stage.input_range)
        p_rg = (far * rg / (rg + rs)) ** 2 / rg
    else:
        i_net = excursion / (rf + rg)
        p_rf = (excursion * rf / (rf + rg)) ** 2 / rf
        p_rg = (excursion * rg / (rf + rg)) ** 2 / rg
    i_load = max(abs(y) for y in stage.output_range) / stage.load_resistance
    req = rel.parallel(rf, rg_side)
    cin = (part.cin if math.isfinite(part.cin) else TYPICAL.cin) + stage.stray
    in_ = part.in_ if math.isfinite(part.in_) else TYPICAL.in_
    en = part.en if math.isfinite(part.en) else TYPICAL.en
    out["i_network"], out["i_total"] = i_net, i_net + i_load
    out["p_rf"], out["p_rg"], out["req"] = p_rf, p_rg, req
    resistor_density = np.sqrt(4 * rel.BOLTZMANN * rel.ROOM_KELVIN * req + (in_ * req) ** 2)
    out["noise_resistors"] = ng * resistor_density
    out["noise_amp"] = ng * en
    out["bias_error"] = np.abs(part.ib) * rf if math.isfinite(part.ib) else np.nan
    out["f_fb"] = rel.feedback_pole(req, cin)
    figures = part if math.isfinite(part.gbw) else _typical_loop(part)
    # the output stage into its resistive load R' = R_L ∥ (network): the divider
    # Ro/R' costs loop gain, and C_L makes a pole with Ro ∥ R'
    ro = part.ro if math.isfinite(part.ro) else 0.0
    loaded = rel.parallel(stage.load_resistance, rf if inverting else rf + rg)
    load_factor = loaded / (loaded + ro)
    load_pole = (1 / (2 * np.pi * rel.parallel(ro, loaded) * stage.load_capacitance)
                 if stage.load_capacitance > 0 and ro > 0 else np.full(rf.shape, np.inf))
    crossover, pm = loop_margin(figures, rf, rg_side, cin, 0.0, load_pole,
                                load_factor=load_factor)
    out["crossover"], out["pm"] = crossover, pm
    cf = capacitor_nearest_e12(rg_side * cin / rf)
    short = pm < stage.phase_margin_min
    cf = np.where(short, cf, np.nan)
    out["cf"] = cf
    out["f_cf"] = np.where(short, 1 / (2 * np.pi * rf * np.nan_to_num(cf, nan=1.0)), np.nan)
    pm_cf, bw_cf = np.full(rf.shape, np.nan), np.full(rf.shape, np.nan)
    if short.any():  # only the candidates that need a Cf
        _, pm_cf[short] = loop_margin(figures, rf[short], rg_side[short], cin, cf[short],
                                      load_pole[short], load_factor=load_factor[short])
    out["pm_cf"] = pm_cf
    topology = "inverting" if inverting else "non-inverting"
    c_diff = 0.0 if inverting or not math.isfinite(part.cin_diff) else part.cin_diff
    out["bw"] = bandwidth_3db(figures, topology, rf, rg, rs if inverting else 0.0, cin,
                              0.0, load_pole, cin_diff=c_diff, load_factor=load_factor)
    if short.any():
        bw_cf[short] = bandwidth_3db(figures, topology, rf[short], rg[short],
                                     rs if inverting else 0.0, cin, cf[short],
                                     load_pole[short], cin_diff=c_diff,
                                     load_factor=load_factor[short])
    out["bw_cf"] = bw_cf
    # normalised figures: ≤ 1 is comfortable
    iout = part.iout if math.isfinite(part.iout) else TYPICAL.iout
    drive = np.maximum(i_net / (DRIVE_SHARE * iout),
                       np.maximum(p_rf, p_rg) / RESISTOR_POWER)
    noise = resistor_density / (NOISE_SHARE * en)
    if stage.dc_budget is not None:
        bias_limit = BIAS_SHARE * stage.dc_budget
    elif math.isfinite(part.vos):
        bias_limit = ng * part.vos
    else:
        bias_limit = math.nan
    bias = np.nan_to_num(out["bias_error"].to_numpy(float) / bias_limit, nan=0.0)
    margin_now = np.where(short & np.isfinite(pm_cf), pm_cf, pm)
    stability = stage.phase_margin_min / np.maximum(margin_now, 1e-3)
    if stage.bandwidth_needed:
        width = np.where(short, bw_cf, out["bw"].to_numpy(float))
        stability = np.maximum(stability, stage.bandwidth_needed / width)
    # what the part cannot do at any level is not the level's fault: scale the
    # stability figure by the best any candidate reaches when that is above 1
    stability = stability / max(1.0, float(np.nanmin(stability)))
    out["drive"], out["noise"], out["bias"], out["stability"] = drive, noise, bias, stability
    out["figure"] = np.maximum.reduce([drive, noise, bias, stability])
    return out


def _typical_loop(part: PartFigures) -> PartFigures:
    """The part's figures with the loop ones taken from :data:`TYPICAL`."""
    return PartFigures(key=part.key, en=part.en, in_=part.in_, ib=part.ib, vos=part.vos,
                       cin=part.cin, iout=part.iout, gbw=TYPICAL.gbw, aol=TYPICAL.aol,
                       pm=TYPICAL.pm, ro=part.ro)


def acceptable(candidates: pd.DataFrame) -> np.ndarray:
    """Candidates whose nominal ratio error is close to the best reachable: within
    a quarter of the tolerance, or within 1.25 × the best error (mask)."""
    error = candidates["error"].abs().to_numpy()
    t = candidates.attrs.get("tolerance", 0.01)
    return error <= max(t / 4, 1.25 * error.min(), 1e-6)


def choose(effects: pd.DataFrame) -> int:
    """Row position of the chosen candidate: among the acceptable ratios, the one
    whose worst normalised effect (``figure``) is smallest, judged in steps of 0.1
    and with every figure below 0.5 counted as equally comfortable; ties go to the
    smaller nominal error, then the smaller figure."""
    ok = acceptable(effects)
    figure = np.where(ok, effects["figure"].to_numpy(float), np.inf)
    figure = np.clip(np.where(np.isnan(figure), 1e12, figure), 0.5, 1e12)
    coarse = np.ceil(figure * 10 - 1e-9) / 10
    error = np.round(effects["error"].abs().to_numpy(), 5)
    order = np.lexsort((figure, error, coarse))
    return int(order[0])


def by_decade(effects: pd.DataFrame) -> pd.DataFrame:
    """One candidate per Rg decade: the acceptable one with the smallest |error|
    (or the smallest |error| when none is acceptable)."""
    frame = effects.assign(_ok=acceptable(effects), _abs=effects["error"].abs(),
                           _decade=np.floor(np.log10(effects["rg"]) + 1e-9))
    frame = frame.sort_values(["_decade", "_ok", "_abs"], ascending=[True, False, True])
    best = frame.groupby("_decade", sort=True).head(1)
    return best.drop(columns=["_ok", "_abs", "_decade"])


@dataclass
class PairChoice:
    """The chosen pair and the table it came from (SI)."""

    rf: float
    rg: float
    gain: float
    error: float
    worst: float
    table: pd.DataFrame                 # every candidate with its effects
    chosen: int                         # row position in ``table``
    series: str
    tolerance: float
    assumptions: list[str] = field(default_factory=list)


def choose_pair(ratio: float, stage: Stage, part: PartFigures | None = None,
                series: str = "E96", tolerance: float | None = None) -> PairChoice:
    """Search ``series`` for Rf/(Rg + Rs) = ``ratio`` and choose the impedance level
    (see :func:`level_effects`, :func:`choose`).  ``part`` None uses :data:`TYPICAL`."""
    assumptions = []
    if part is None:
        part = TYPICAL
        assumptions.append("no part given: typical figures assumed for the level "
                           "(en 10 nV/√Hz, in 1 pA/√Hz, C_in 5 pF, iout 10 mA, "
                           "GBW 10 MHz, pm 60°)")
    elif not math.isfinite(part.gbw) or not math.isfinite(part.pm):
        assumptions.append("the part lacks gbw or pm: typical loop figures assumed")
    source = stage.source if stage.topology == "inverting" else 0.0
    table = pair_candidates(ratio, series, tolerance, source, stage.topology)
    table = level_effects(table, stage, part).reset_index(drop=True)
    row = choose(table)
    pick = table.iloc[row]
    return PairChoice(float(pick.rf), float(pick.rg), float(pick.gain), float(pick.error),
                      float(pick.worst), table, row, table.attrs["series"],
                      table.attrs["tolerance"], assumptions)
