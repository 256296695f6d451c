"""Light flicker from PWM: the PWM frequency and modulation depth against the recommended practice of IEEE Std
1789-2015 ("IEEE Recommended Practices for Modulating Current in High-Brightness LEDs for Mitigating Health
Risks to Viewers"), and the banding a camera sees.

Modulation (percent flicker) is 100·(L_max − L_min)/(L_max + L_min); a PWM that switches the light fully off
modulates 100 % at its frequency. Boundaries (IEEE Std 1789-2015, recommended practices; thresholds from
memory, the text not at hand), with f in Hz and the modulation in percent:

    low risk            f < 90 Hz:  Mod ≤ 0.025·f     90 Hz ≤ f ≤ 1250 Hz:  Mod ≤ 0.08·f     above 1250 Hz: any
    no observable effect f < 90 Hz:  Mod ≤ 0.01·f      90 Hz ≤ f ≤ 3000 Hz:  Mod ≤ 0.0333·f   above 3000 Hz: any

Camera banding (common practice)
    A rolling-shutter camera exposes its rows one after another; a light modulated at f shows bands unless
    the exposure spans a whole number of PWM periods. Between frames the bands move at the alias
    |f − k·fps| (k the nearest whole multiple): near a multiple of the frame rate (alias within a tenth of
    the frame rate) they crawl slowly and change the brightness from frame to frame, which camera-based
    plant monitoring reads as a change in the plants.
"""

from __future__ import annotations

import numpy as np
import numpy.typing as npt

from calcsvc.core.outcome import FloatArray

LOW_FREQUENCY_HZ = 90.0  # IEEE Std 1789-2015 (from memory)
LOW_RISK_FREE_HZ = 1250.0  # above this any modulation is low risk (from memory)
NO_EFFECT_FREE_HZ = 3000.0  # above this any modulation has no observable effect (from memory)
LOW_RISK_SLOPES = (0.025, 0.08)  # percent per Hz below and above 90 Hz (from memory)
NO_EFFECT_SLOPES = (0.01, 0.0333)  # percent per Hz below and above 90 Hz (from memory)
BANDING_NEAR = 0.1  # alias within this share of the frame rate: bands crawl (common practice)


def _limit(frequency_hz: npt.ArrayLike, slopes: tuple[float, float], free_hz: float) -> FloatArray:
    f = np.asarray(frequency_hz, dtype=np.float64)
    percent = np.where(f < LOW_FREQUENCY_HZ, slopes[0], slopes[1]) * f
    return np.where(f > free_hz, 1.0, np.minimum(percent / 100.0, 1.0))


def low_risk_limit(frequency_hz: npt.ArrayLike) -> FloatArray:
    """The largest modulation (a fraction, 1 = 100 %, never more) of the low-risk region at f: 1 from 1250 Hz."""
    return _limit(frequency_hz, LOW_RISK_SLOPES, LOW_RISK_FREE_HZ)


def no_effect_limit(frequency_hz: npt.ArrayLike) -> FloatArray:
    """The largest modulation (a fraction, never above 1) with no observable effect at f: 1 from 3000 Hz."""
    return _limit(frequency_hz, NO_EFFECT_SLOPES, NO_EFFECT_FREE_HZ)


def low_risk_frequency(modulation_depth: npt.ArrayLike) -> FloatArray:
    """The lowest PWM frequency at which this modulation (a fraction) lies in the low-risk region: the inverse of
    ``low_risk_limit``, so the check's margin says how far the frequency is from that boundary. Below 90 Hz the
    region reaches 0.025 %/Hz · 90 Hz = 2.25 %; at 90 Hz it steps to 7.2 %; 100 % needs 1250 Hz."""
    percent = 100.0 * np.asarray(modulation_depth, dtype=np.float64)
    low, high = LOW_RISK_SLOPES
    return np.where(
        percent <= low * LOW_FREQUENCY_HZ,
        percent / low,
        np.where(percent <= high * LOW_FREQUENCY_HZ, LOW_FREQUENCY_HZ, percent / high),
    )


def camera_alias(frequency_hz: npt.ArrayLike, frame_rate_hz: npt.ArrayLike) -> FloatArray:
    """|f − k·fps| with k the nearest whole multiple: the rate the bands move between frames (Hz)."""
    f = np.asarray(frequency_hz, dtype=np.float64)
    fps = np.asarray(frame_rate_hz, dtype=np.float64)
    return np.abs(f - np.round(f / fps) * fps)


def bands_crawl(frequency_hz: npt.ArrayLike, frame_rate_hz: npt.ArrayLike) -> npt.NDArray[np.bool_]:
    """Whether the PWM frequency sits near (not on) a multiple of the frame rate; False where either is absent."""
    alias = camera_alias(frequency_hz, frame_rate_hz)
    with np.errstate(invalid="ignore"):
        return (alias > 0.0) & (alias <= BANDING_NEAR * np.asarray(frame_rate_hz))


WORKER_NOTE = (
    "The PWM frequency and modulation lie outside IEEE Std 1789-2015's low-risk region: people working under "
    "these lights for hours may get headaches, eye strain or, rarely, worse; raise the PWM frequency (above "
    "1250 Hz any depth is low risk, above 3000 Hz there is no observable effect; from memory) or smooth the "
    "current."
)
CAMERA_NOTE = (
    "The PWM frequency lies near a multiple of the camera's frame rate: rolling-shutter bands crawl through "
    "the image and each frame's brightness differs, which plant monitoring can mistake for a change in the "
    "plants; expose for a whole number of PWM periods or move the frequency onto an exact multiple."
)
