"""A MOSFET's on-resistance at the gate voltage it gets, and at the junction temperature its own heat makes.

Gate voltage
    Datasheets state the largest on-resistance at a few gate-source voltages (25 °C). Between two stated points
    it is interpolated linearly in the gate voltage; above the highest it is taken as stated there (it only
    falls further). Below the lowest stated gate voltage nothing is known: the part is not specified for that
    drive (a part stated only at 10 V is not a logic-level part for a 3.3 V pin, a caution of the trade), so
    the value is NaN and callers refuse it.

Temperature (from memory: silicon MOSFETs' on-resistance rises about 1.5× from 25 to 100 °C and about 1.9×
to 150 °C, near linearly)
    R(Tj) = R25·(1 + α·(Tj − 25 °C)),  α = 0.007 /K.
    With the conduction loss P_c = I²·R(Tj)·D and a further fixed loss P_x (switching), thermal Ohm's law
    Tj = Ta + Rθ·(P_c + P_x) is linear in Tj, so
        Tj = (Ta + Rθ·(I²·D·R25·(1 − 25α) + P_x)) / (1 − Rθ·I²·D·R25·α),
    and where the denominator is not positive the part runs away thermally (NaN).
"""

from __future__ import annotations

import numpy as np
import numpy.typing as npt

from calcsvc.core import thermal
from calcsvc.core.outcome import FloatArray

RDS_TEMPCO_PER_K = 0.007  # relative rise of on-resistance per kelvin (from memory)


def at_gate_voltage(gate_v: npt.ArrayLike, points_v: FloatArray, points_ohm: FloatArray) -> FloatArray:
    """On-resistance at ``gate_v`` (n,) from stated points (n, k) ordered by gate voltage, NaN where a point
    is not stated; NaN below the lowest point (module docstring)."""
    g = np.asarray(gate_v, dtype=np.float64)
    volts, ohms = points_v.copy(), points_ohm.copy()
    for k in range(1, volts.shape[1]):  # an absent point repeats the one before: an empty segment
        absent = np.isnan(volts[:, k])
        volts[:, k] = np.where(absent, volts[:, k - 1], volts[:, k])
        ohms[:, k] = np.where(absent, ohms[:, k - 1], ohms[:, k])
    value = ohms[:, 0].copy()
    for k in range(volts.shape[1] - 1):
        low_v, high_v = volts[:, k], volts[:, k + 1]
        inside = (g > low_v) & (high_v > low_v)
        with np.errstate(divide="ignore", invalid="ignore"):
            share = np.clip((g - low_v) / (high_v - low_v), 0.0, 1.0)
        value = np.where(inside, ohms[:, k] + share * (ohms[:, k + 1] - ohms[:, k]), value)
    return np.where(g >= volts[:, 0], value, np.nan)


def hot(rds_25_ohm: npt.ArrayLike, junction_c: npt.ArrayLike) -> FloatArray:
    """R(Tj) = R25·(1 + α·(Tj − 25))."""
    return np.asarray(rds_25_ohm, dtype=np.float64) * (
        1.0 + RDS_TEMPCO_PER_K * (np.asarray(junction_c) - thermal.REFERENCE_C)
    )


def junction(
    ambient_c: npt.ArrayLike,
    rth_k_per_w: npt.ArrayLike,
    current_a: npt.ArrayLike,
    duty: npt.ArrayLike,
    rds_25_ohm: npt.ArrayLike,
    other_loss_w: npt.ArrayLike,
) -> FloatArray:
    """The junction temperature where conduction (rising with temperature) and ``other_loss_w`` balance the
    cooling; NaN where it runs away (module docstring)."""
    rth = np.asarray(rth_k_per_w, dtype=np.float64)
    k = np.asarray(current_a) ** 2 * np.asarray(duty) * np.asarray(rds_25_ohm)  # W per unit of R/R25
    a = RDS_TEMPCO_PER_K
    denominator = 1.0 - rth * k * a
    numerator = np.asarray(ambient_c) + rth * (k * (1.0 - thermal.REFERENCE_C * a) + np.asarray(other_loss_w))
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(denominator > 0.0, numerator / denominator, np.nan)
