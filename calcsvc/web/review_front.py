"""The front stage's op-amp results in the channel review's reports: its single-supply windows, DC output error,
noise and stability, as Markdown and HTML sections with exactly the numbers of the review's JSON
(``stages.front_stage``)."""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

from markupsafe import escape

Format = Callable[[Any], str]  # a JSON number as the report shows it (review_report.number)

# Section title → rows of (label, one result or a (low, high) pair of results, unit).
FRONT_SECTIONS: dict[str, tuple[tuple[str, str | tuple[str, str], str], ...]] = {
    "Single-supply windows": (
        ("input common-mode range", ("input_common_mode_min_v", "input_common_mode_max_v"), "V"),
        ("signal at the inputs", ("signal_input_min_v", "signal_input_max_v"), "V"),
        ("output swing", ("output_swing_min_v", "output_swing_max_v"), "V"),
        ("signal at the output", ("signal_output_min_v", "signal_output_max_v"), "V"),
    ),
    "DC output error": (
        ("offset voltage × noise gain", "output_error_offset_v", "V"),
        ("bias current", "output_error_bias_v", "V"),
        ("offset current", "output_error_offset_current_v", "V"),
        ("worst case", "output_error_v", "V"),
        ("root sum of squares", "output_error_rss_v", "V"),
        ("worst case in converter LSBs", "output_error_lsb", "LSB"),
    ),
    "Noise": (
        ("output noise density", "output_noise_density_v_per_rthz", "V/√Hz"),
        ("noise bandwidth", "noise_bandwidth_hz", "Hz"),
        ("output noise", "output_noise_rms_v", "V RMS"),
        ("referred to the input", "input_noise_rms_v", "V RMS"),
        ("in converter LSBs", "output_noise_lsb_rms", "LSB RMS"),
        ("worth in ideal converter bits", "noise_bits", "bits"),
    ),
    "Stability": (
        ("loop crossover", "crossover_hz", "Hz"),
        ("phase margin", "phase_margin_deg", "°"),
        ("closed-loop peaking", "closed_loop_peaking_db", "dB"),
        ("step overshoot", "step_overshoot_pct", "%"),
        ("suggested isolation resistor", "isolation_suggested_ohm", "Ω"),
        ("phase margin with it", "isolation_phase_margin_deg", "°"),
    ),
}


def _value(results: dict[str, Any], source: str | tuple[str, str], unit: str, number: Format) -> str:
    if isinstance(source, tuple):
        low, high = (results.get(name) for name in source)
        return "—" if low is None or high is None else f"{number(low)} to {number(high)} {unit}"
    found = results.get(source)
    return "—" if found is None else f"{number(found)} {unit}"


def _sections(review: dict[str, Any], number: Format) -> list[tuple[str, list[tuple[str, str]]]]:
    """Each section's rows that apply (a section whose every value is missing is left out)."""
    results = review["stages"].get("front_stage")
    if not results:
        return []
    found = []
    for title, rows in FRONT_SECTIONS.items():
        shown = [(label, _value(results, source, unit, number)) for label, source, unit in rows]
        shown = [(label, text) for label, text in shown if text != "—"]
        if shown:
            found.append((title, shown))
    return found


def front_stage_markdown(review: dict[str, Any], number: Format) -> list[str]:
    """The front stage's sections as Markdown lines (none without a front stage)."""
    lines: list[str] = []
    for title, rows in _sections(review, number):
        lines += ["", f"## Front stage: {title.lower()}", "", "| quantity | value |", "|---|---|"]
        lines += [f"| {label} | {text} |" for label, text in rows]
    return lines


def front_stage_html(review: dict[str, Any], number: Format, level: int = 2) -> str:
    """The same as HTML tables, each under a heading of ``level`` (where they sit in the page's outline)."""
    return "".join(
        f"<h{level}>Front stage: {escape(title.lower())}</h{level}><table class='front-stage'>"
        + "".join(f"<tr><th scope='row'>{escape(label)}</th><td>{escape(text)}</td></tr>" for label, text in rows)
        + "</table>"
        for title, rows in _sections(review, number)
    )
