"""The engineering relations of the solver, as numpy functions of SI arrays.

Each function works element-wise on scalars or arrays (one element per part), so
the checks can evaluate a whole library at once.  The relations are those agreed in
the project's method sheet (shared/METHOD.md); section numbers refer to it.
"""
from __future__ import annotations

import numpy as np

BOLTZMANN = 1.380649e-23  # J/K, exact since the 2019 SI redefinition
ROOM_KELVIN = 298.15
DEFAULT_NOISE_LOW_HZ = 0.1  # lower edge of the noise band when the brief gives none


def slew_min(frequency, peak):
    """Minimum slew rate (V/s) for a sine of ``frequency`` (Hz) and ``peak`` (V). §2"""
    return 2 * np.pi * np.asarray(frequency) * np.asarray(peak)


def full_power_bandwidth(slew, peak):
    """Highest sine frequency (Hz) a part of ``slew`` (V/s) passes at ``peak`` (V). §2"""
    return np.asarray(slew) / (2 * np.pi * np.asarray(peak))


def open_loop(frequency, gbw, aol=np.inf):
    """Single-pole open-loop gain A(jf) (complex); ``aol`` = inf means GBW/(jf). §2"""
    f = np.asarray(frequency, dtype=float)
    aol = np.asarray(aol, dtype=float)
    inverse = np.where(np.isfinite(aol), 1 / aol, 0.0) + 1j * f / gbw
    return 1 / inverse


def closed_loop_gain(frequency, gain, noise_gain, gbw, aol=np.inf):
    """Closed-loop gain A_cl = G / (1 + NG/A(jf)) (complex). §2"""
    return gain / (1 + noise_gain / open_loop(frequency, gbw, aol))


def gain_error(frequency, gain, noise_gain, gbw, aol=np.inf):
    """Amplitude error ε(f) = 1 − |A_cl|/|G| (fraction). §2"""
    return 1 - np.abs(closed_loop_gain(frequency, gain, noise_gain, gbw, aol)) / np.abs(gain)


def bandwidth_for_gain_error(frequency, error):
    """Closed-loop bandwidth f_c (Hz) that keeps the single-pole error at ``frequency``
    within ``error``: f_c = f / sqrt((1 − ε)^−2 − 1). §2"""
    return np.asarray(frequency) / np.sqrt((1 - np.asarray(error)) ** -2 - 1)


def gbw_for_gain_error(frequency, error, noise_gain, aol=np.inf):
    """GBW (Hz) needed for amplitude error ``error`` at ``frequency`` with finite A_OL.

    Exact for the single-pole model: |1 + NG/A_OL + j·NG·f/GBW| = 1/(1 − ε).  Returns
    inf where the DC gain error NG/A_OL alone uses up the budget.  With A_OL = inf it
    reduces to NG·f_c of :func:`bandwidth_for_gain_error`.
    """
    aol = np.asarray(aol, dtype=float)
    real = 1 + np.where(np.isfinite(aol), noise_gain / aol, 0.0)
    room = (1 - np.asarray(error)) ** -2 - real ** 2
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(room > 0, noise_gain * np.asarray(frequency) / np.sqrt(room), np.inf)


def aol_for_gain_error(error, noise_gain):
    """Open-loop gain (V/V) for DC gain error ``error``: NG / (1/(1 − ε) − 1). §2"""
    return noise_gain / (1 / (1 - np.asarray(error)) - 1)


def settling_time(step, slew, gbw, noise_gain, fraction):
    """Time (s) for an output step of ``step`` V to settle within ``fraction`` of it.

    τ = NG/(2π·GBW).  While the exponential would need more than the slew rate the
    output slews; it leaves slewing with SR·τ still to go, then settles linearly:
    t = (V − SR·τ)/SR + τ·ln(SR·τ/(ε·V)), or τ·ln(1/ε) when it never slews; when
    SR·τ < ε·V the output is inside the band while still slewing: t = (1 − ε)·V/SR. §2
    """
    tau = np.asarray(noise_gain) / (2 * np.pi * np.asarray(gbw))
    step = np.abs(np.asarray(step, dtype=float))
    linear = tau * np.log(1 / np.asarray(fraction))
    knee = np.asarray(slew) * tau
    with np.errstate(divide="ignore", invalid="ignore"):
        slewing = (step - knee) / slew + tau * np.log(knee / (fraction * step))
        slew_only = (1 - np.asarray(fraction)) * step / slew
    return np.where(step > knee, np.where(knee < fraction * step, slew_only, slewing), linear)


def parallel(a, b):
    """a ∥ b for resistances (inf-safe: inf ∥ b = b)."""
    a, b = np.asarray(a, dtype=float), np.asarray(b, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        return 1 / (1 / a + 1 / b)


def thermal_noise_density(resistance, kelvin=ROOM_KELVIN):
    """Johnson noise density sqrt(4kTR) in V/√Hz. §5"""
    return np.sqrt(4 * BOLTZMANN * kelvin * np.asarray(resistance))


def noise_density_input(en, in_, source, feedback_parallel, kelvin=ROOM_KELVIN):
    """Input-referred white noise density (V/√Hz):
    sqrt(en² + 4kT(Rs + Req) + in²(Rs² + Req²)). §5"""
    rs, req = np.asarray(source, dtype=float), np.asarray(feedback_parallel, dtype=float)
    return np.sqrt(np.asarray(en) ** 2 + 4 * BOLTZMANN * kelvin * (rs + req)
                   + np.asarray(in_) ** 2 * (rs ** 2 + req ** 2))


def integrated_en_squared(en, corner, f_low, f_high):
    """∫ en² df (V²) over [f_low, f_high] with a 1/f corner:
    en²·((f_H − f_L) + f_ce·ln(f_H/f_L)). §5"""
    return np.asarray(en) ** 2 * ((f_high - f_low) + np.asarray(corner) * np.log(f_high / f_low))


def output_noise_rms(en, in_, corner, source, feedback_parallel, noise_gain,
                     f_low, f_high, kelvin=ROOM_KELVIN):
    """Output-referred rms noise (V) over [f_low, f_high]; the 1/f corner applies to en."""
    resistive = (4 * BOLTZMANN * kelvin * (source + feedback_parallel)
                 + np.asarray(in_) ** 2 * (source ** 2 + feedback_parallel ** 2))
    band = f_high - f_low
    power = integrated_en_squared(en, corner, f_low, f_high) + resistive * band
    return noise_gain * np.sqrt(power)


def noise_bandwidth_single_pole(f_c):
    """Equivalent noise bandwidth (Hz) of a single pole at ``f_c``: (π/2)·f_c. §5"""
    return np.pi / 2 * np.asarray(f_c)


def feedback_pole(feedback_parallel, input_capacitance):
    """Pole (Hz) of the feedback network with the input capacitance: 1/(2π·Req·C). §6"""
    with np.errstate(divide="ignore"):
        return 1 / (2 * np.pi * np.asarray(feedback_parallel) * np.asarray(input_capacitance))


def second_pole(gbw, unity_phase_margin_deg):
    """Second open-loop pole (Hz) from the unity-gain phase margin: GBW·tan(PM1). §6"""
    pm = np.asarray(unity_phase_margin_deg, dtype=float)
    with np.errstate(invalid="ignore"):
        # PM1 ≥ 90° means no second pole near the crossover (tan would turn negative)
        return np.where(pm >= 90, np.inf, np.asarray(gbw) * np.tan(np.radians(np.minimum(pm, 89.999))))


def loop_gain(frequency, gbw, aol, noise_gain, poles):
    """Loop gain L(jf) = A(jf)·β0·Π 1/(1 + j f/p) for the extra poles ``poles`` (Hz)."""
    f = np.asarray(frequency, dtype=float)
    value = open_loop(f, gbw, aol) / noise_gain
    for pole in poles:
        value = value / (1 + 1j * f / pole)
    return value


def crossover_and_phase_margin(gbw, aol, noise_gain, poles, iterations=80):
    """Crossover frequency (Hz) where |L| = 1 and phase margin (degrees), vectorised.

    |L| falls monotonically with frequency for this all-pole loop, and ln(1/|L|²) is
    convex in log-frequency, so Newton's method on log-frequency (at most
    ``iterations`` steps, run on every part at once) finds the crossover within
    [1 µHz, 10 THz].  Parts whose loop gain never reaches 1 get NaN crossover and a
    phase margin of 180°.
    """
    gbw = np.asarray(gbw, dtype=float)
    aol, noise_gain = np.broadcast_to(aol, gbw.shape), np.broadcast_to(noise_gain, gbw.shape)
    poles = [np.broadcast_to(np.asarray(p, dtype=float), gbw.shape) for p in poles]
    low = np.full(gbw.shape, 1e-6)  # Hz: the range searched for the crossover
    high = np.full(gbw.shape, 1e13)
    # 1/|L|² in real arithmetic (no complex temporaries): |L| > 1 ⇔ this < 1
    inv_aol2 = np.where(np.isfinite(aol), 1 / aol, 0.0) ** 2
    inv_gbw, ng2 = 1 / gbw, np.asarray(noise_gain, dtype=float) ** 2
    with np.errstate(divide="ignore"):
        inv_poles = [1 / p for p in poles]

    def inverse_magnitude2(f):
        value = f * inv_gbw
        value *= value
        value += inv_aol2
        value *= ng2
        for inv_pole in inv_poles:
            term = f * inv_pole
            term *= term
            term += 1
            value *= term
        return value

    never = inverse_magnitude2(low) > 1
    # Newton's method on u = ln f for g(u) = ln(1/|L|²), which is increasing and convex
    # in u (a sum of log-sum-exp terms), started at the single-pole crossover: an upper
    # bound, since the extra poles only lower |L|.  From the right of the root of a
    # convex increasing function Newton's steps fall monotonically onto it (quadratic
    # convergence), so a handful of whole-array steps replaces the ~60 of a bisection.
    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
        start = np.sqrt(np.maximum(1 / ng2 - inv_aol2, 0.0)) / inv_gbw
        u = np.log(np.clip(np.where(never, 1.0, start), low, high))
        for _ in range(iterations):
            f = np.exp(u)
            x = f * inv_gbw
            x *= x
            slope = 2 * x / (inv_aol2 + x)
            for inv_pole in inv_poles:
                y = f * inv_pole
                y *= y
                slope += 2 * y / (1 + y)
            step = np.where(never, 0.0, np.log(inverse_magnitude2(f)) / slope)
            u = u - step
            if not np.nanmax(np.abs(step), initial=0.0) > 1e-9:
                break  # quadratic convergence: the step just taken was the last needed
        crossover = np.exp(np.clip(u, np.log(low), np.log(high)))
    phase = -np.degrees(np.arctan(crossover * np.where(np.isfinite(aol), aol, np.inf) / gbw))
    phase = np.where(np.isfinite(aol), phase, -90.0)
    for pole in poles:
        phase = phase - np.degrees(np.arctan(crossover / pole))
    margin = 180.0 + phase
    return np.where(never, np.nan, crossover), np.where(never, 180.0, margin)


def dc_error(topology, noise_gain, vos, drift, delta_t, ib, source, rf):
    """Worst-case output DC error (V), magnitudes added. §4

    non-inverting: NG·(|Vos| + |drift|·ΔT + |Ib|·Rs) + |Ib|·Rf;
    inverting: NG·(|Vos| + |drift|·ΔT) + |Ib|·Rf; follower: the non-inverting form
    with NG = 1 and Rf = 0.
    """
    vos, drift, ib = np.abs(vos), np.abs(drift), np.abs(ib)
    source_term = 0.0 if topology == "inverting" else ib * source
    return noise_gain * (vos + drift * delta_t + source_term) + ib * rf
