"""The thermal inputs the channel review and the single power-carrying calculations (``led_string``,
``bjt_switch``) declare alike: one declaration each, so their names, defaults and ranges agree everywhere."""

from __future__ import annotations

from calcsvc.core import thermal
from calcsvc.core.spec import Input, positive

AMBIENT_C = Input(
    "ambient_c", "degC", "ambient temperature the parts run in (25 °C: where ratings are stated)", 25.0,
    minimum=-60, maximum=200,
)  # fmt: skip
TJ_MAX_C = Input(
    "tj_max_c", "degC", "transistor's maximum junction temperature (class-typical, from memory)", 150.0,
    minimum=26, maximum=250,
)  # fmt: skip
RTH_JA_K_PER_W = positive(
    "rth_ja_k_per_w", "K/W", "transistor junction to ambient; absent: from its rating at 25 °C", optional=True
)
RTH_JC_K_PER_W = positive("rth_jc_k_per_w", "K/W", "transistor junction to case, for a heat sink", optional=True)
HEATSINK_K_PER_W = positive(
    "heatsink_k_per_w", "K/W", "heat sink, case to ambient with its interface; absent: none", optional=True
)
LED_TJ_MAX_C = Input(
    "led_tj_max_c", "degC", "LED's maximum junction temperature (class-typical, from memory)", 125.0,
    minimum=26, maximum=250,
)  # fmt: skip
LED_RTH_JB_K_PER_W = Input(
    "led_rth_jb_k_per_w", "K/W", "LED junction to board (a 5 mm indicator's leads, from memory)", 200.0, minimum=0
)
LED_RTH_BA_K_PER_W = Input(
    "led_rth_ba_k_per_w", "K/W", "board to ambient, per LED (an unsinked board, from memory)", 150.0, minimum=0
)
VF_TEMPCO_V_PER_K = Input(
    "vf_tempco_v_per_k", "V/K", "LED forward-voltage temperature coefficient (about -2 mV/K, from memory)", -0.002,
    minimum=-0.1, maximum=0,
)  # fmt: skip
IF_DERATING_KNEE_C = Input(
    "if_derating_knee_c", "degC",
    "ambient above which the LED's maximum current falls linearly to zero at led_tj_max_c; absent: no curve",
    optional=True, minimum=-60, maximum=250,
)  # fmt: skip
RESISTOR_RATED_TO_C = Input(
    "resistor_rated_to_c", "degC",
    "ambient up to which the string resistor takes its full rating (IEC 60115-1, from memory)",
    thermal.RESISTOR_RATED_TO_C, minimum=-60, maximum=250,
)  # fmt: skip
RESISTOR_ZERO_POWER_C = Input(
    "resistor_zero_power_c", "degC",
    "ambient at which the string resistor's rating falls to zero (IEC 60115-1, from memory)",
    thermal.RESISTOR_ZERO_POWER_C, minimum=-60, maximum=300,
)  # fmt: skip

LED = (
    LED_TJ_MAX_C, LED_RTH_JB_K_PER_W, LED_RTH_BA_K_PER_W, VF_TEMPCO_V_PER_K, IF_DERATING_KNEE_C,
    RESISTOR_RATED_TO_C, RESISTOR_ZERO_POWER_C,
)  # fmt: skip
TRANSISTOR = (TJ_MAX_C, RTH_JA_K_PER_W, RTH_JC_K_PER_W, HEATSINK_K_PER_W)

# What a part supplies: (part parameter, input name).
LED_PARAMETERS = (
    ("vf_tempco_v_per_k", "vf_tempco_v_per_k"),
    ("tj_max_c", "led_tj_max_c"),
    ("rth_jb_k_per_w", "led_rth_jb_k_per_w"),
    ("rth_ba_k_per_w", "led_rth_ba_k_per_w"),
    ("if_derating_knee_c", "if_derating_knee_c"),
)
TRANSISTOR_PARAMETERS = (
    ("tj_max_c", "tj_max_c"),
    ("rth_ja_k_per_w", "rth_ja_k_per_w"),
    ("rth_jc_k_per_w", "rth_jc_k_per_w"),
)
