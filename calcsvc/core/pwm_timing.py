"""PWM timing of a switch: the shortest pulse and duty step a PWM of given frequency and resolution makes, the
switch's turn-on and turn-off times, its switching loss, and whether the shortest pulse covers the edges.

Shortest pulse and duty step
    A PWM counter of ``bits`` resolution at frequency f steps the duty in 1/2^bits and makes its shortest
    non-zero pulse t_min = 1/(f·2^bits).

Switching times
    Bipolar, from the part's stated times: on = delay + rise, off = storage + fall; the rise and fall are the
    transitions that dissipate. MOSFET, from gate charge and gate current (Q = I·t): the gate takes its whole
    charge Qg through the gate resistor Rg while the gate sits near its threshold, so
        t_on  = Qg·Rg/(V_high − Vth,max)       (least charging current: the highest threshold)
        t_off = Qg·(Rg + R_pin)/Vth,low        (least discharging current: the lowest threshold)
    with Vth,low = Vth,max/2 (from memory: a threshold's stated range spans about 2:1) and the pin sinking
    through its own resistance R_pin = V_OL/I_rated (a resistive pin, as ``bjt_drive`` models it). Taking the whole gate
    charge, not only its Miller share, overstates the transition: on the safe side for the on-time check and
    the switching loss.

Switching loss (resistive load; power-electronics textbook result, e.g. Mohan, Undeland & Robbins, *Power
Electronics*, the section on switching characteristics)
    Across a linear transition of length t the switch's voltage falls from V to 0 while its current rises from 0
    to I (and back at turn-off): the energy is ∫ V(1 − s/t)·I·s/t ds = V·I·t/6 per edge, so
        P_sw = V·I·(t_r + t_f)·f/6.

On-time check (common practice)
    The shortest pulse should be at least ten times the switch's turn-on plus turn-off time, so its smallest
    steps still switch fully and the light stays close to proportional to the duty.
"""

from __future__ import annotations

import numpy as np
import numpy.typing as npt

from calcsvc.core.outcome import FloatArray, Violation, first_bad, require
from calcsvc.core.spec import Input, fraction, positive

ON_TIME_MULTIPLE = 10.0  # shortest pulse / (turn-on + turn-off time) (common practice)
THRESHOLD_SPAN = 2.0  # Vth,max / Vth,min of a stated threshold range (from memory)
MAX_BITS = 24  # a PWM finer than this has steps no switch or light follows


def shortest_on_time(frequency_hz: npt.ArrayLike, bits: npt.ArrayLike) -> FloatArray:
    """The shortest non-zero pulse, 1/(f·2^bits) (s); NaN where the frequency is not given."""
    return 1.0 / (np.asarray(frequency_hz, dtype=np.float64) * np.exp2(bits))


def duty_step(bits: npt.ArrayLike) -> FloatArray:
    """The smallest duty step, 1/2^bits."""
    return np.exp2(-np.asarray(bits, dtype=np.float64))


def bipolar_times(
    delay_s: npt.ArrayLike, rise_s: npt.ArrayLike, storage_s: npt.ArrayLike, fall_s: npt.ArrayLike
) -> tuple[FloatArray, FloatArray]:
    """(turn-on, turn-off) of a bipolar switch from its stated times: delay + rise, storage + fall."""
    return np.add(delay_s, rise_s, dtype=np.float64), np.add(storage_s, fall_s, dtype=np.float64)


def gate_threshold_low(vgs_th_max_v: npt.ArrayLike) -> FloatArray:
    """The lowest threshold a part of this stated maximum may have (module docstring)."""
    return np.asarray(vgs_th_max_v, dtype=np.float64) / THRESHOLD_SPAN


def gate_times(
    qg_c: npt.ArrayLike,
    rg_ohm: npt.ArrayLike,
    high_v: npt.ArrayLike,
    pin_low_ohm: npt.ArrayLike,
    vgs_th_max_v: npt.ArrayLike,
) -> tuple[FloatArray, FloatArray]:
    """(turn-on, turn-off) of a MOSFET's gate through ``rg_ohm`` by Q = I·t (module docstring); NaN turn-on
    where ``high_v`` does not exceed the threshold (the part may never turn fully on)."""
    q = np.asarray(qg_c, dtype=np.float64)
    on_current = (np.asarray(high_v) - np.asarray(vgs_th_max_v)) / np.asarray(rg_ohm)
    off_current = gate_threshold_low(vgs_th_max_v) / (np.asarray(rg_ohm) + np.asarray(pin_low_ohm))
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(on_current > 0, q / on_current, np.nan), q / off_current


def switching_loss(
    voltage_v: npt.ArrayLike,
    current_a: npt.ArrayLike,
    rise_s: npt.ArrayLike,
    fall_s: npt.ArrayLike,
    frequency_hz: npt.ArrayLike,
) -> FloatArray:
    """V·I·(t_r + t_f)·f/6 (W) for a resistive load; 0 where no PWM frequency is given (the switch is static)."""
    f = np.asarray(frequency_hz, dtype=np.float64)
    loss = np.asarray(voltage_v) * np.asarray(current_a) * (np.asarray(rise_s) + np.asarray(fall_s)) * f / 6.0
    return np.where(np.isnan(f), 0.0, loss)


def edges_limit(turn_on_s: npt.ArrayLike, turn_off_s: npt.ArrayLike) -> FloatArray:
    """The shortest pulse the on-time check accepts: ON_TIME_MULTIPLE × (turn-on + turn-off)."""
    return ON_TIME_MULTIPLE * (np.asarray(turn_on_s, dtype=np.float64) + np.asarray(turn_off_s))


def require_pwm(
    v: list[Violation], frequency_hz: FloatArray, bits: FloatArray, depth: FloatArray, frame_rate_hz: FloatArray
) -> None:
    """The preconditions on the PWM inputs (NaN frequency or frame rate: not given)."""
    with np.errstate(invalid="ignore"):
        for name, x in (("pwm_frequency_hz", frequency_hz), ("camera_frame_rate_hz", frame_rate_hz)):
            bad = np.isinf(x) | (x <= 0)
            require(v, bad, name, f"{name} ({first_bad(x, bad)} Hz) must be positive and finite when given")
        bad = ~np.isfinite(bits) | (bits < 1) | (bits > MAX_BITS) | (bits != np.round(bits))
        require(
            v,
            bad,
            "pwm_resolution_bits",
            f"pwm_resolution_bits ({first_bad(bits, bad)}) must be a whole number from 1 to {MAX_BITS}",
        )
        bad = ~np.isfinite(depth) | (depth < 0) | (depth > 1)
        require(v, bad, "modulation_depth", f"modulation_depth ({first_bad(depth, bad)}) must lie in [0, 1]")


# ---- the PWM inputs of the switch calculations and the channel review -------------------------------------

PWM_FREQUENCY_HZ = positive("pwm_frequency_hz", "Hz", "PWM frequency; absent: the switch is static", optional=True)
PWM_RESOLUTION_BITS = Input(
    "pwm_resolution_bits",
    "dimensionless",
    "PWM resolution in bits",
    8,
    minimum=1,
    maximum=MAX_BITS,
    integer=True,
)
MODULATION_DEPTH = fraction(
    "modulation_depth", "the light's modulation, 1 when the PWM switches it fully off", default=1.0
)
CAMERA_FRAME_RATE_HZ = positive(
    "camera_frame_rate_hz", "Hz", "frame rate of a camera watching the plants", optional=True
)
PWM_INPUTS = (PWM_FREQUENCY_HZ, PWM_RESOLUTION_BITS, MODULATION_DEPTH, CAMERA_FRAME_RATE_HZ)
# A bipolar part that states no switching times is taken as slow as a 1 A Darlington (our conservative defaults,
# class-typical from memory): the on-time check then errs towards failing.
BIPOLAR_TIMES = (
    Input("td_s", "s", "transistor's turn-on delay time", 2e-7, minimum=0),
    Input("tr_s", "s", "transistor's rise time", 5e-7, minimum=0),
    Input("ts_s", "s", "transistor's storage time", 3e-6, minimum=0),
    Input("tf_s", "s", "transistor's fall time", 1.5e-6, minimum=0),
)
