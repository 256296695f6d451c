"""The channel review's front stage (``channel``): the op-amp preamp's calculations on the rows that have one,
merged into one outcome and spread over all rows.

Calculations, each on the channel's own flat inputs: ``closed_loop`` (one stage: ``signal_in_band``,
``gain_achievable``, ``output_offset``), ``slew`` with the channel's supply as the rail span (``slew_rate``,
``output_swing``, ``opamp_supply_min``/``_max``), ``opamp_windows`` on that single supply (the input common-mode
and output windows rail by rail about ``reference_v``), ``opamp_dc_error`` (``output_error``), ``opamp_noise``
with the resistors at the hottest ambient the review covers (``noise_bits``) and ``opamp_stability``
(``phase_margin``, with an isolation resistor suggested where it falls short).
"""

from __future__ import annotations

import numpy as np

from calcsvc.core import closed_loop, opamp_dc_error, opamp_noise, opamp_stability, opamp_windows, slew
from calcsvc.core.channel_inputs import ChannelInputs
from calcsvc.core.channel_stages import closed_loop_inputs, has_front_stage, slew_inputs
from calcsvc.core.outcome import BoolArray, Check, FloatArray, Notice, Outcome, Violation, take

# The optional inputs of the windows, DC error, noise and stability (``phase_margin_min_deg`` has a default, so it
# is always present and is not among them).
OPAMP_STAGE_FIELDS = (
    *opamp_windows.HEADROOMS,
    "reference_v",
    "rf_ohm",
    "plus_input_ohm",
    "input_bias_current_a",
    "input_offset_current_a",
    "output_error_max_v",
    "adc_full_scale_v",
    "adc_bits",
    "voltage_noise_v_per_rthz",
    "current_noise_a_per_rthz",
    "second_pole_hz",
    "output_resistance_ohm",
    "load_capacitance_f",
    "isolation_ohm",
)
# Front-stage inputs besides gbw_hz, whose presence (non-NaN) marks a row as having a front stage.
FRONT_STAGE_FIELDS = (
    "gain",
    "open_loop_gain",
    "slew_rate_v_per_s",
    "output_headroom_v",
    "signal_hz",
    "amplitude_v",
    "opamp_supply_min_v",
    "opamp_supply_max_v",
    "input_offset_v",
    "output_offset_max_v",
    *OPAMP_STAGE_FIELDS,
)


def windows_inputs(i: ChannelInputs, supply_v: FloatArray) -> opamp_windows.WindowInputs:
    """The windows on a single supply of ``supply_v`` (the channel's: the op-amp is powered from it)."""
    return opamp_windows.WindowInputs(
        inverting=np.asarray(i.inverting, dtype=bool),
        gain=i.gain,
        supply_v=supply_v,
        reference_v=i.reference_v,
        amplitude_v=i.amplitude_v,
        **{name: getattr(i, name) for name in opamp_windows.HEADROOMS},
    )


def dc_error_inputs(i: ChannelInputs) -> opamp_dc_error.DcErrorInputs:
    names = opamp_dc_error.DcErrorInputs.__dataclass_fields__
    return opamp_dc_error.DcErrorInputs(
        **{name: getattr(i, name) for name in names if name != "inverting"},
        inverting=np.asarray(i.inverting, dtype=bool),
    )


def noise_inputs(i: ChannelInputs) -> opamp_noise.NoiseInputs:
    names = set(opamp_noise.NoiseInputs.__dataclass_fields__) - {"inverting", "ambient_c"}
    return opamp_noise.NoiseInputs(
        **{name: getattr(i, name) for name in names},
        inverting=np.asarray(i.inverting, dtype=bool),
        ambient_c=np.where(np.isnan(i.ambient_max_c), i.ambient_c, i.ambient_max_c),
    )


def stability_inputs(i: ChannelInputs) -> opamp_stability.StabilityInputs:
    names = opamp_stability.StabilityInputs.__dataclass_fields__
    return opamp_stability.StabilityInputs(
        **{name: getattr(i, name) for name in names if name != "inverting"},
        inverting=np.asarray(i.inverting, dtype=bool),
    )


def front_violations(i: ChannelInputs) -> list[tuple[list[Violation], dict[str, str]]]:
    """Each front-stage calculation's violations on the rows with a front stage (rows of ``take(i, front)``),
    with the renaming of its fields to the channel's (messages use the same words)."""
    front = has_front_stage(i)
    return [
        (closed_loop.validate(take(closed_loop_inputs(i), front)), {}),
        (slew.validate(take(slew_inputs(i, i.supply_v), front)), {"frequency_hz": "signal_hz"}),
        (opamp_windows.validate(take(windows_inputs(i, i.supply_v), front)), {}),
        (opamp_dc_error.validate(take(dc_error_inputs(i), front)), {}),
        (opamp_noise.validate(take(noise_inputs(i), front)), {}),
        (opamp_stability.validate(take(stability_inputs(i), front)), {}),
    ]


def expand(outcome: Outcome, mask: BoolArray) -> Outcome:
    """An outcome computed on the rows in ``mask``, spread over all rows: NaN (or False) results, and
    checks that pass without a value or limit (do not apply), elsewhere."""
    n = mask.shape[0]

    def spread(x: np.ndarray, fill: float | bool) -> np.ndarray:
        out = np.full((n, *x.shape[1:]), fill, dtype=x.dtype)
        out[mask] = x
        return out

    def fill_for(x: np.ndarray) -> float | bool:
        return False if x.dtype == np.bool_ else np.nan

    def notices(items: list[Notice]) -> list[Notice]:
        return [Notice(spread(note.rows, False), note.message) for note in items]

    return Outcome(
        results={k: spread(x, fill_for(x)) for k, x in outcome.results.items()},
        checks=[
            Check(c.name, spread(c.ok, True), spread(c.value, np.nan), spread(c.limit, np.nan), c.sense, c.detail)
            for c in outcome.checks
        ],
        warnings=notices(outcome.warnings),
        cautions=notices(outcome.cautions),
    )


def front_stage(inputs: ChannelInputs, validated: bool = False) -> Outcome:
    """Every front-stage calculation's outcome on the rows with a front stage, merged (in the order of the
    module docstring) and spread over all rows."""
    front = has_front_stage(inputs)
    outcomes = (
        closed_loop.compute(take(closed_loop_inputs(inputs), front), validated),
        slew.compute(take(slew_inputs(inputs, inputs.supply_v), front), validated),
        opamp_windows.compute(take(windows_inputs(inputs, inputs.supply_v), front), validated),
        opamp_dc_error.compute(take(dc_error_inputs(inputs), front), validated),
        opamp_noise.compute(take(noise_inputs(inputs), front), validated),
        opamp_stability.compute(take(stability_inputs(inputs), front), validated),
    )
    merged = Outcome(
        results={k: x for o in outcomes for k, x in o.results.items()},
        checks=[c for o in outcomes for c in o.checks],
        warnings=[note for o in outcomes for note in o.warnings],
        cautions=[note for o in outcomes for note in o.cautions],
    )
    return expand(merged, front)
