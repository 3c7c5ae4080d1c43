"""A SPICE netlist of the stage, with a behavioural model of the part from its row.

The model (a subcircuit named after the part) is built only from the table's
figures, no vendor model:

- input capacitances ``cin_cm`` (each input to ground) and ``cin_diff`` (between);
- a transconductance gm = 2π·GBW·C1 into R1 ∥ C1 with A_OL = gm·R1 (one dominant
  pole at GBW/A_OL, method §2); its current is clipped at ±SR·C1, so the output
  cannot move faster than the slew rate;
- a second pole at GBW·tan(pm) (method §6), through a unity buffer and an RC;
- the output pin clamped to [V− + swing_low, V+ − swing_high] of the brief's supply
  (the clamp acts at the pin, so the limit holds whatever the load);
- the open-loop output resistance ``ro``: V(out) = V(internal) − ro·I_out.

Missing figures are replaced as the netlist's comments say (A_OL 140 dB, no second
pole, ideal swing, 1 mΩ output).  Input common-mode limits are not modelled.

The stage: the brief's sine (or DC) source with its source resistance, the network of
a :class:`selector.offset.OffsetSolution` (Rf, Rg, divider or summing resistors), an
optional Cf, the brief's stray capacitance at the − input, the load R_L ∥ C_L, and a
0 V source ``Vinj`` between the amplifier output ``out`` and the feedback node ``fb``:
with ``loop=True`` it carries the AC test signal, and the loop gain is
T = −V(out)/V(fb) (voltage injection; accurate while the network's impedance is far
above the output's).  ``.ac`` and (for a sine)
``.tran`` analyses follow.  :func:`simulate` runs ngspice in batch mode.
"""
from __future__ import annotations

import math
import re
import shutil
import subprocess
import tempfile
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from .brief import Brief
from .errors import InputError
from .network import PartFigures, resistor_code
from .offset import OffsetSolution

C1 = 1e-6            # F, the dominant-pole capacitor of the model (sets the scale)
AOL_MISSING = 1e7    # V/V used when the part gives no A_OL
RO_MISSING = 1e-3    # Ω used when the part gives no output resistance
BYPASS = 100e-9      # F across a divider that feeds the + input
TRAN_PERIODS = 12
TRAN_POINTS_PER_PERIOD = 400


def _num(value: float) -> str:
    """A SPICE number without prefixes (ngspice reads 1e-12 unambiguously)."""
    return f"{value:.9g}"


def _safe(name: str) -> str:
    return re.sub(r"[^A-Za-z0-9_]", "_", name)


def model(part: PartFigures, supply: tuple[float, float]) -> tuple[str, list[str]]:
    """Subcircuit text for ``part`` on ``supply`` (V−, V+), and notes on what was
    assumed.  Raises InputError when the part has no GBW."""
    notes = []
    if not math.isfinite(part.gbw) or part.gbw <= 0:
        raise InputError(f"part '{part.key}': no gbw figure, so no model can be built")
    aol = part.aol if math.isfinite(part.aol) and part.aol > 0 else AOL_MISSING
    if aol is AOL_MISSING:
        notes.append("aol not given: 140 dB assumed")
    gm = 2 * math.pi * part.gbw * C1
    r1 = aol / gm
    lines = [f".subckt {model_name(part)} inp inm out",
             f"* behavioural model from the library row of {part.key}: GBW "
             f"{part.gbw:.4g} Hz, A_OL {aol:.4g} V/V, pm {part.pm:.4g} deg, slew "
             f"{part.slew:.4g} V/s"]
    cin_cm = part.cin_cm if math.isfinite(part.cin_cm) else 0.0
    cin_diff = part.cin_diff if math.isfinite(part.cin_diff) else 0.0
    if not (math.isfinite(part.cin_cm) and math.isfinite(part.cin_diff)):
        notes.append("input capacitance not given (in part): taken as 0")
    if cin_cm > 0:
        lines += [f"Ccmp inp 0 {_num(cin_cm)}", f"Ccmm inm 0 {_num(cin_cm)}"]
    if cin_diff > 0:
        lines.append(f"Cdif inp inm {_num(cin_diff)}")
    if math.isfinite(part.slew) and part.slew > 0:
        imax = part.slew * C1
        lines.append(f"Bgm 0 n1 I = max(-{_num(imax)}, min({_num(imax)}, "
                     f"{_num(gm)}*(V(inp)-V(inm))))")
    else:
        notes.append("slew not given: no slew limit")
        lines.append(f"Ggm 0 n1 inp inm {_num(gm)}")
    lines += [f"R1 n1 0 {_num(r1)}", f"C1 n1 0 {_num(C1)}"]
    if math.isfinite(part.pm) and 0 < part.pm < 90:
        f2 = part.gbw * math.tan(math.radians(part.pm))
        lines += ["E2 n2a 0 n1 0 1", "R2 n2a n2 1000",
                  f"C2 n2 0 {_num(1 / (2 * math.pi * 1000 * f2))}"]
        node = "n2"
    else:
        notes.append("pm not given (or ≥ 90°): no second pole")
        node = "n1"
    v_neg, v_pos = supply
    low = v_neg + (part.swing_low if math.isfinite(part.swing_low) else 0.0)
    high = v_pos - (part.swing_high if math.isfinite(part.swing_high) else 0.0)
    # output resistance and swing limit in one source: V(out) = V(n2) − Ro·I_out,
    # clipped to the swing limits at the pin, so the limit holds whatever the load
    ro = part.ro if math.isfinite(part.ro) and part.ro > 0 else RO_MISSING
    if ro is RO_MISSING:
        notes.append("ro not given: 1 mΩ output")
    lines += [f"Bout n3 0 V = max({_num(low)}, min({_num(high)}, "
              f"V({node}) - {_num(ro)}*I(Vsense)))",
              "Vsense n3 out DC 0", f".ends {model_name(part)}"]
    return "\n".join(lines), notes


def model_name(part: PartFigures) -> str:
    return "amp_" + _safe(part.key or "typical").lower()


@dataclass
class Netlist:
    """The netlist text and what the analyses are (SI)."""

    text: str
    frequency: float
    amplitude: float
    midpoint: float
    tran_stop: float | None
    ac_stop: float
    notes: list[str]


def build(brief: Brief, network: OffsetSolution, part: PartFigures, cf: float | None = None,
          loop: bool = False, ac_points: int = 100) -> Netlist:
    """The stage netlist for ``brief`` with ``network`` and ``part``.

    ``loop=True`` moves the AC stimulus from the signal source to ``Vinj`` (loop-gain
    measurement, see the module text).
    """
    v_neg, v_pos = brief.supply_negative, brief.supply_positive
    sub, notes = model(part, (v_neg, v_pos))
    mid = (brief.signal_min + brief.signal_max) / 2
    amp = (brief.signal_max - brief.signal_min) / 2
    f = brief.frequency if brief.waveform == "sine" else 0.0
    ac_stop = max(10 * part.gbw, 1e6)
    topo = brief.topology
    kind = network.kind
    lines = [f"* stage '{brief.name}' with {part.key}: {topo}, network {kind}",
             "* written by selector (netlist); behavioural model, see the subcircuit",
             *[f"* note: {n}" for n in notes + network.notes], "",
             sub, "",
             f"Vpos vpos 0 DC {_num(v_pos)}"]
    if v_neg != 0:
        lines.append(f"Vneg vneg 0 DC {_num(v_neg)}")
    ac_sig = 0 if loop else 1
    source = f"SIN({_num(mid)} {_num(amp)} {_num(f)})" if f > 0 else ""
    lines.append(f"Vsig sig 0 DC {_num(mid)} AC {ac_sig} {source}".rstrip())
    rs = brief.source_resistance
    lines.append(f"Rs sig src {_num(rs if rs > 0 else 1e-3)}")
    rail = {v_pos: "vpos", v_neg: "vneg" if v_neg != 0 else "0"}
    ref_node = None
    if network.source_voltage is not None and network.source_voltage not in rail:
        lines.append(f"Vref vref 0 DC {_num(network.source_voltage)}")
        ref_node = "vref"
    elif network.source_voltage is not None:
        ref_node = rail[network.source_voltage]

    inp, body = "inp", []
    if topo == "follower":
        inp = "src"
        lines.append("Rfb fb inm 1e-3")
    elif kind == "summing":
        body += [f"R1 src inp {_num(network.r1)} ; {resistor_code(network.r1)}",
                 f"R2 {ref_node} inp {_num(network.r2)} ; {resistor_code(network.r2)}",
                 f"Rg inm 0 {_num(network.rg)} ; {resistor_code(network.rg)}"]
    elif topo == "non-inverting":
        inp = "src"
        if kind == "rg-to-reference" and network.ra is not None:
            body.append(f"Ra {ref_node} inm {_num(network.ra)} ; {resistor_code(network.ra)}")
            if network.rb is not None:
                body.append(f"Rb inm 0 {_num(network.rb)} ; {resistor_code(network.rb)}")
        else:
            end = ref_node if kind == "rg-to-reference" else "0"
            body.append(f"Rg inm {end} {_num(network.rg)} ; {resistor_code(network.rg)}")
    else:  # inverting
        body.append(f"Rg src inm {_num(network.rg)} ; {resistor_code(network.rg)}")
        if kind == "reference-at-plus" and network.ra is not None:
            body += [f"Ra {ref_node} inp {_num(network.ra)} ; {resistor_code(network.ra)}",
                     f"Rb inp 0 {_num(network.rb)} ; {resistor_code(network.rb)}",
                     f"Cbyp inp 0 {_num(BYPASS)}"]
        elif kind == "reference-at-plus":
            inp = ref_node
        else:
            inp = "0"
    if topo != "follower":
        body.append(f"Rf fb inm {_num(network.rf)} ; {resistor_code(network.rf)}")
        if cf:
            body.append(f"Cf fb inm {_num(cf)}")
    if brief.stray_capacitance > 0:
        body.append(f"Cstray inm 0 {_num(brief.stray_capacitance)}")
    lines += body
    lines.append(f"Vinj fb out DC 0 AC {1 if loop else 0}")
    lines.append(f"XU {inp} inm out {model_name(part)}")
    if math.isfinite(brief.load_resistance):
        lines.append(f"RL out 0 {_num(brief.load_resistance)}")
    if brief.load_capacitance > 0:
        lines.append(f"CL out 0 {_num(brief.load_capacitance)}")
    lines += ["", f".ac dec {ac_points} 1 {_num(ac_stop)}"]
    tran_stop = None
    if f > 0:
        tran_stop = TRAN_PERIODS / f
        step = 1 / (f * TRAN_POINTS_PER_PERIOD)
        lines.append(f".tran {_num(step)} {_num(tran_stop)} 0 {_num(step)}")
    lines += [".end", ""]
    return Netlist("\n".join(lines), f, amp, mid, tran_stop, ac_stop, notes)


# ------------------------------------------------------------------ running it
def ngspice() -> str | None:
    """Path of the ngspice program, or None."""
    return shutil.which("ngspice")


def _with_control(text: str, folder: Path, loop: bool) -> str:
    ac = ("vdb(out) vp(out)" if not loop
          else "real(v(out)) imag(v(out)) real(v(fb)) imag(v(fb))")
    control = [".control", "set wr_singlescale", "set wr_vecnames", "run",
               "setplot ac1", f"wrdata {folder / 'ac.txt'} {ac}"]
    if ".tran" in text and not loop:
        control += ["setplot tran1", f"wrdata {folder / 'tran.txt'} v(out) v(src)"]
    control += [".endc"]
    return text.replace("\n.end\n", "\n" + "\n".join(control) + "\n.end\n")


def _read(path: Path) -> dict[str, np.ndarray]:
    rows = path.read_text().split("\n")
    names = rows[0].split()
    data = np.loadtxt(rows[1:], ndmin=2) if len(rows) > 1 else np.empty((0, len(names)))
    return {name: data[:, i] for i, name in enumerate(names)}


def simulate(netlist: Netlist | str, loop: bool = False, timeout: float = 120.0
             ) -> dict[str, dict[str, np.ndarray]]:
    """Run ``netlist`` in ngspice batch mode; returns {"ac": …, "tran": …} columns.

    For the normal netlist ``ac`` has frequency, vdb(out), vp(out); with ``loop`` it
    has real(v(out)), imag(v(out)), real(v(fb)), imag(v(fb)).  Raises RuntimeError when ngspice
    is missing or fails (this is a test and development aid, not user input).
    """
    program = ngspice()
    if program is None:
        raise RuntimeError("ngspice is not installed")
    with tempfile.TemporaryDirectory(prefix="selector-spice-") as name:
        folder = Path(name)
        deck = folder / "stage.cir"
        text = netlist if isinstance(netlist, str) else netlist.text
        deck.write_text(_with_control(text, folder, loop))
        done = subprocess.run([program, "-b", str(deck)], capture_output=True, text=True,
                              timeout=timeout, cwd=folder)
        # batch mode exits 1 after a .control run ("no .plot lines"): judge by output
        if not (folder / "ac.txt").exists():
            raise RuntimeError(f"ngspice failed ({done.returncode}):\n{done.stdout[-2000:]}"
                               f"\n{done.stderr[-2000:]}")
        result = {"ac": _read(folder / "ac.txt")}
        if (folder / "tran.txt").exists():
            result["tran"] = _read(folder / "tran.txt")
        return result
