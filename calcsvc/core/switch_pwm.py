"""The PWM stage of a switch, shared by every switch kind: from its turn-on and turn-off times, the shortest
pulse and duty step, the switching loss, the on-time check, and the flicker and camera notes (models in
``pwm_timing`` and ``flicker``). Without a PWM frequency the switch is static: no switching loss, and neither
check applies."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from calcsvc.core import flicker, pwm_timing
from calcsvc.core.outcome import Check, FloatArray, Notice, add_notice
from calcsvc.core.spec import Result


@dataclass(frozen=True)
class PwmStage:
    results: dict[str, np.ndarray]
    checks: list[Check]
    warnings: list[Notice]
    cautions: list[Notice]


def pwm_stage(
    turn_on_s: FloatArray,
    turn_off_s: FloatArray,
    rise_s: FloatArray,
    fall_s: FloatArray,
    voltage_v: FloatArray,
    current_a: FloatArray,
    frequency_hz: FloatArray,
    bits: FloatArray,
    modulation_depth: FloatArray,
    frame_rate_hz: FloatArray,
) -> PwmStage:
    """Results, checks and notices of a switch's PWM (module docstring); ``rise_s`` and ``fall_s`` are the
    transitions that dissipate, ``voltage_v`` the voltage across the switch when off."""
    no_pwm = np.isnan(frequency_hz)
    shortest = pwm_timing.shortest_on_time(frequency_hz, bits)
    edges = pwm_timing.edges_limit(turn_on_s, turn_off_s)
    low_risk = flicker.low_risk_limit(frequency_hz)
    with np.errstate(invalid="ignore"):
        flickers = ~no_pwm & (modulation_depth > low_risk)
        results: dict[str, np.ndarray] = {
            "turn_on_s": turn_on_s,
            "turn_off_s": turn_off_s,
            "shortest_on_time_s": shortest,
            "duty_step": np.where(no_pwm, np.nan, pwm_timing.duty_step(bits)),
            "switching_loss_w": pwm_timing.switching_loss(voltage_v, current_a, rise_s, fall_s, frequency_hz),
            "flicker_low_risk_limit": low_risk,
            "flicker_no_effect_limit": flicker.no_effect_limit(frequency_hz),
            "camera_alias_hz": flicker.camera_alias(frequency_hz, frame_rate_hz),
        }
        checks = [
            Check(
                "shortest_pulse_covers_edges",
                no_pwm | (edges <= shortest),
                edges,
                shortest,
                "max",
                "Ten times the switch's turn-on plus turn-off time must fit in the shortest PWM pulse, "
                "1/(f·2^bits) (common practice); not checked without a PWM frequency.",
            ),
            Check(
                "flicker_low_risk",
                ~flickers,
                frequency_hz,
                np.where(no_pwm, np.nan, flicker.low_risk_frequency(modulation_depth)),
                "min",
                "The PWM frequency must reach the lowest frequency at which the light's modulation depth lies in "
                "IEEE Std 1789-2015's low-risk region (thresholds from memory); not checked without a PWM "
                "frequency.",
            ),
        ]
    warnings: list[Notice] = []
    cautions: list[Notice] = []
    add_notice(warnings, flicker.bands_crawl(frequency_hz, frame_rate_hz), flicker.CAMERA_NOTE)
    add_notice(cautions, flickers, flicker.WORKER_NOTE)
    return PwmStage(results, checks, warnings, cautions)


PWM_RESULTS = (
    Result("turn_on_s", "s", "turn-on time of the switch"),
    Result("turn_off_s", "s", "turn-off time of the switch"),
    Result("shortest_on_time_s", "s", "shortest PWM pulse, 1/(f 2^bits)"),
    Result("duty_step", "", "smallest duty step, 1/2^bits"),
    Result("switching_loss_w", "W", "V I (t_r + t_f) f / 6 (resistive load)"),
    Result("flicker_low_risk_limit", "", "largest low-risk modulation at the PWM frequency (IEEE Std 1789-2015)"),
    Result("flicker_no_effect_limit", "", "largest modulation with no observable effect (IEEE Std 1789-2015)"),
    Result("camera_alias_hz", "Hz", "rate at which rolling-shutter bands move between frames"),
)
