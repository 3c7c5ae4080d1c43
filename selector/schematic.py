"""Draw the designed stage as an SVG (optional extra ``schematic``: schemdraw).

Imported only when ``--schematic`` is used.  Our own layout: the source on the left,
the op-amp in the middle with Rf (and Cf) above it, Rg or the reference network
below, the load on the right; every resistor carries its IEC 60062 code and value.
Written atomically (selector.safeio); an existing file needs ``force``.
"""
from __future__ import annotations

import math

from .errors import InputError
from .network import resistor_code
from .units import format_si


def _label(name: str, value: float) -> str:
    return f"{name} {resistor_code(value)}"


def draw(result, fmt: str = "svg") -> bytes:
    """The drawing of a :class:`selector.stage.StageDesign` as bytes (SVG, or "png"
    through matplotlib for a quick look)."""
    try:
        import schemdraw
        import schemdraw.elements as elm
    except ImportError:
        raise InputError("--schematic needs the optional 'schematic' extra "
                         "(pip install 'selector[schematic]')") from None
    schemdraw.use("svg" if fmt == "svg" else "matplotlib")
    s, brief = result.solution, result.brief
    inverting = brief.topology == "inverting"
    cf = None
    chosen = result.candidates[result.candidates["label"] == "chosen"]
    if len(chosen) and math.isfinite(chosen["cf"].iloc[0]):
        cf = float(chosen["cf"].iloc[0])
    d = schemdraw.Drawing(show=False)
    d.config(fontsize=11, unit=2.5)
    # non-inverting: + on top (flipped symbol); inverting: − on top
    amp = d.add(elm.Opamp(leads=True).flip() if not inverting else elm.Opamp(leads=True))
    minus, plus = amp.in1, amp.in2
    x0 = minus[0]
    # feedback: from the − input away from the + side, Rf back to the output
    away = -1.8 if not inverting else 1.8
    corner = (minus[0], minus[1] + away)
    right = amp.out[0] + 0.5
    d.add(elm.Line().at(minus).to(corner))
    d.add(elm.Resistor().at(corner).to((right, corner[1]))
          .label(_label("Rf", s.rf), loc="bottom" if not inverting else "top"))
    d.add(elm.Line().at((right, corner[1])).to((right, amp.out[1])))
    if cf:
        far = (minus[0], corner[1] + away * 0.8)
        d.add(elm.Line().at(corner).to(far))
        d.add(elm.Capacitor().at(far).to((right, far[1]))
              .label(f"Cf {format_si(cf, 'F', 2)}", loc="bottom" if not inverting else "top"))
        d.add(elm.Line().at((right, far[1])).to((right, corner[1])))
    # output and load
    d.add(elm.Line().at(amp.out).right(1.5))
    out = d.here
    d.add(elm.Dot(open=True).label("out", "top"))
    if math.isfinite(brief.load_resistance):
        d.add(elm.Resistor().at(out).down().label(
            f"RL {format_si(brief.load_resistance, 'ohm')}", loc="bottom"))
        d.add(elm.Ground())
    if brief.load_capacitance > 0:
        d.add(elm.Line().at(out).right(2.2))
        d.add(elm.Capacitor().down().label(
            f"CL {format_si(brief.load_capacitance, 'F')}", loc="bottom"))
        d.add(elm.Ground())
    wave = (f"{format_si(brief.frequency, 'Hz')} sine" if brief.frequency > 0 else "DC")
    source_label = (f"{format_si(brief.signal_min, 'V')} to "
                    f"{format_si(brief.signal_max, 'V')}, {wave}")
    far_left = x0 - 7.5
    signal_node = minus if inverting else plus
    if inverting:
        d.add(elm.Resistor().at(minus).to((x0 - 4.0, minus[1])).label(_label("Rg", s.rg)))
        d.add(elm.Line().to((far_left, minus[1])))
    elif s.kind == "summing":
        d.add(elm.Line().at(plus).to((x0 - 1.5, plus[1])))
        node = d.here
        d.add(elm.Resistor().up().at(node).label(_label("R2", s.r2)))
        d.add(elm.Vdd().label(f"{s.source_voltage:g} V"))
        d.add(elm.Resistor().at(node).to((x0 - 5.0, plus[1])).label(_label("R1", s.r1)))
        d.add(elm.Line().to((far_left, plus[1])))
    else:
        d.add(elm.Line().at(plus).to((far_left, plus[1])))
    d.add(elm.SourceSin().at((far_left, signal_node[1])).down()
          .label(source_label, loc="bottom"))
    d.add(elm.Ground())
    _rest(d, elm, plus if inverting else minus, s, inverting)
    title = (f"{brief.name}: {brief.topology}, {s.kind}; gain {s.gain:.4g}, "
             f"offset {s.offset:.4g} V")
    d.add(elm.Label().at((far_left, amp.center[1] + 5.0)).label(title, halign="left"))
    return d.get_imagedata(fmt)


def _rest(d, elm, node, s, inverting) -> None:
    """The input that carries no signal: Rg (non-inverting) or the + input
    (inverting), to ground, to a reference, or through a divider Ra/Rb."""
    x, y = node
    d.add(elm.Line().at(node).to((x - 1.2, y)))
    d.add(elm.Line().down(0.8))
    junction = d.here
    divider = s.ra is not None and s.kind in ("rg-to-reference", "reference-at-plus")
    if divider:
        if s.rb is not None:
            d.add(elm.Resistor().at(junction).down().label(_label("Rb", s.rb), loc="bottom"))
            d.add(elm.Ground())
        left = (junction[0] - 1.8, junction[1])
        d.add(elm.Line().at(junction).to(left))
        if s.kind == "reference-at-plus":
            d.add(elm.Capacitor().at(left).down().label("100 nF", loc="bottom"))
            d.add(elm.Ground())
            further = (left[0] - 2.4, left[1])
            d.add(elm.Line().at(left).to(further))
            left = further
        d.add(elm.Resistor().at(left).down().label(_label("Ra", s.ra), loc="bottom"))
        d.add(elm.Line().down(0.4))
        d.add(elm.Vdd().reverse().down().label(f"{s.source_voltage:g} V", loc="bottom"))
        return
    if not inverting:
        d.add(elm.Resistor().at(junction).down().label(_label("Rg", s.rg), loc="bottom"))
    if s.reference is not None and s.kind in ("rg-to-reference", "reference-at-plus"):
        d.add(elm.Line().down(0.4))
        d.add(elm.Vdd().reverse().down().label(f"Vref {s.reference:.4g} V", loc="bottom"))
    else:
        d.add(elm.Ground())


def write_svg(result, path, force: bool = False, inputs=()) -> None:
    """Draw ``result`` and write it to ``path`` atomically (see selector.safeio)."""
    from .safeio import write_bytes
    data = draw(result)
    write_bytes(path, data if isinstance(data, bytes) else data.encode("utf-8"), force,
                inputs)
