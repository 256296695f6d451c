"""Readable renderings of a channel review (Markdown for design notes, HTML for the page), with exactly the
numbers of the JSON document they are made from."""

from __future__ import annotations

from typing import Any

from markupsafe import escape

from calcsvc.web.review_front import front_stage_html, front_stage_markdown

_SUFFIX_UNITS = (
    ("_v_per_s", "V/s"),
    ("_ohm", "Ω"),
    ("_hz", "Hz"),
    ("_ah", "Ah"),
    ("_w", "W"),
    ("_v", "V"),
    ("_a", "A"),
    ("_s", "s"),
)


def unit_of(name: str) -> str:
    """The unit a field name carries (the project names every field with its unit)."""
    return next((unit for suffix, unit in _SUFFIX_UNITS if name.endswith(suffix)), "")


def number(value: Any) -> str:
    """Six significant figures: enough to compare with the JSON, short enough to read."""
    if value is None:
        return "—"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, int | float):
        return f"{value:.6g}"
    return str(value)


def _percent(margin: Any) -> str:
    return "—" if margin is None else f"{margin * 100:.3g} %"


def quantity(value: Any, unit: str) -> str:
    """A number with its unit, as a person reads it in a table."""
    shown = number(value)
    return f"{shown} {unit}" if unit and value is not None else shown


def _corner(corner: dict[str, str]) -> str:
    return ", ".join(f"{k} {v}" for k, v in corner.items()) or "—"


def _check_rows(review: dict[str, Any]) -> list[list[str]]:
    rows = []
    for check in review["checks"]:
        unit = check["unit"]
        worst = check["worst_case"]
        rows.append(
            [
                check["name"],
                check["stage"].replace("_", " "),
                quantity(check["value"], unit),
                quantity(check["limit"], unit),
                _percent(check["margin"]),
                quantity(worst["value"], unit),
                quantity(worst["limit"], unit),
                _percent(worst["margin"]),
                _corner(worst["corner"]),
                "pass" if check["ok"] else "FAIL",
            ]
        )
    return rows


CHECK_HEADER = [
    "check",
    "stage",
    "nominal",
    "limit",
    "margin",
    "worst case",
    "worst-case limit",
    "worst margin",
    "worst corner",
    "result",
]
BOM_HEADER = ["item", "count", "value", "series, tolerance", "minimum rating", "part, revision"]


def _bom_rows(entries: list[dict[str, Any]]) -> list[list[str]]:
    rows = []
    for entry in entries:
        if entry["kind"] == "resistor":
            rating = entry["rating_min_w"]
            rows.append(
                [
                    entry["description"],
                    str(entry["count"]),
                    quantity(entry["value_ohm"], "Ω"),
                    f"{entry['series']}, ±{entry['tolerance'] * 100:.3g} %",
                    "none up to 5 W fits" if rating is None else quantity(rating, "W"),
                    "—",
                ]
            )
        else:
            part = "given by its values" if entry["part_id"] is None else f"{entry['part_id']} r{entry['revision']}"
            rows.append([entry["description"], str(entry["count"]), "—", "—", "—", part])
    return rows


def _bom_sections(review: dict[str, Any]) -> list[tuple[str, list[list[str]]]]:
    bom = review["bill_of_materials"]
    return [
        ("Per channel", _bom_rows(bom["per_channel"])),
        (f"Whole design ({bom['channels']} channel(s))", _bom_rows(bom["whole_design"])),
    ]


def _yield_line(review: dict[str, Any]) -> str:
    found = review["yield"]
    if not found:
        return "Yield not computed (samples 0)."
    most = f"; most failing check: {found['most_failing_check']}" if found["most_failing_check"] else ""
    leds = "LEDs drawn independently"
    if found["vf_model"] == "one_reel":
        leds = f"LEDs of a build from one reel, {number(found['vf_bin_width_v'])} V forward-voltage bin"
    return (
        f"Yield {found['fraction'] * 100:.4g} % of {found['samples']} simulated builds "
        f"(95 % interval {found['ci_low'] * 100:.4g}–{found['ci_high'] * 100:.4g} %, seed {found['seed']}; "
        f"{leds}){most}."
    )


def heat_line(review: dict[str, Any]) -> str:
    """Each part's temperature and derated limit at the review's ambient, and the largest passing ambient."""
    heat = review["stages"]["thermal"]
    led = (
        "runs away (no stable temperature)"
        if heat["led_junction_c"] is None
        else f"{number(heat['led_junction_c'])} °C"
    )
    top = review["max_ambient_c"]
    passing = "fails already at the coldest ambient" if top is None else f"passes up to {number(top)} °C ambient"
    return (
        f"At {number(heat['ambient_c'])} °C ambient: LED junction {led} "
        f"(current {number(heat['led_current_hot_a'])} A, limit {number(heat['led_current_limit_a'])} A); "
        f"transistor junction {number(heat['transistor_junction_c'])} °C "
        f"(derated limit {number(heat['transistor_derated_limit_w'])} W); string resistor hot spot "
        f"{number(heat['resistor_hot_spot_c'])} °C (derated limit {number(heat['resistor_derated_limit_w'])} W). "
        f"The design {passing}."
    )


def switch_line(review: dict[str, Any]) -> str | None:
    """A MOSFET switch's gate, on-resistance, losses and junction at the worst-case drain current and the review's
    ambient (its checks are in the table; an NPN's numbers are all there); None for an NPN switch."""
    switch = review["stages"]["switch"]
    if "rg_ohm" not in switch:
        return None
    pulldown = review["inputs"].get("gate_pulldown_ohm")
    fitted = (
        f"Gate pull-down {number(pulldown)} Ω"
        if pulldown is not None
        else f"Gate pull-down none fitted (recommended {number(switch['gate_pulldown_recommended_ohm'])} Ω)"
    )
    frequency = review["inputs"].get("pwm_frequency_hz")
    pwm = f"PWM frequency {number(frequency)} Hz" if frequency is not None else "PWM frequency none (static switch)"
    return (
        f"Switch: N-channel MOSFET at {number(switch['drain_current_max_a'])} A worst-case drain current. "
        f"Gate resistor {number(switch['rg_ohm'])} Ω (pin peak {number(switch['gate_peak_current_a'])} A); {fitted}; "
        f"gate {number(switch['gate_v'])} V. On-resistance {number(switch['rds_on_ohm'])} Ω at that gate voltage "
        f"(25 °C), {number(switch['rds_on_hot_ohm'])} Ω hot. Conduction loss {number(switch['conduction_loss_w'])} W, "
        f"Switching loss {number(switch['switching_loss_w'])} W; Junction temperature "
        f"{number(switch['junction_c'])} °C at {number(review['stages']['thermal']['ambient_c'])} °C ambient. {pwm}; "
        f"edges {number(switch['turn_on_s'])} s on, {number(switch['turn_off_s'])} s off."
    )


def _markdown_table(header: list[str], rows: list[list[str]]) -> list[str]:
    return ["| " + " | ".join(header) + " |", "|" + "---|" * len(header)] + ["| " + " | ".join(r) + " |" for r in rows]


def render_markdown(review: dict[str, Any]) -> str:
    verdict = review["verdict"].upper()
    lines = [f"# Channel review: {verdict}", ""]
    if review["failing"]:
        lines += [f"Failing checks: {', '.join(review['failing'])}.", ""]
    lines += ["## Cautions", ""] + [f"- {note}" for note in review["cautions"]] + [f"- {review['safety']}", ""]
    lines += [
        f"Largest duty cycle the supply allows for {review['inputs'].get('channels', 1)} channel(s): "
        f"{number(review['max_duty_cycle'])}.",
        "",
        *([line, ""] if (line := switch_line(review)) else []),
        heat_line(review),
        "",
        _yield_line(review),
        "",
        "## Bill of materials",
    ]
    for title, rows in _bom_sections(review):
        lines += ["", f"### {title}", "", *_markdown_table(BOM_HEADER, rows)]
    lines += ["", "## Checks", "", *_markdown_table(CHECK_HEADER, _check_rows(review))]
    lines += front_stage_markdown(review, number)
    if review["warnings"]:
        lines += ["", "## Warnings", ""] + [f"- {note}" for note in review["warnings"]]
    lines += ["", "## Parts", ""]
    lines += [f"- {p['role']}: `{p['part_id']}` revision {p['revision']} ({p['status']})" for p in review["parts"]]
    if not review["parts"]:
        lines.append("- none: every value was given explicitly")
    lines += ["", "## Inputs", "", "| input | value |", "|---|---|"]
    lines += [f"| {name} | {quantity(value, unit_of(name))} |" for name, value in sorted(review["inputs"].items())]
    lines += ["", f"Fingerprint: `{review['fingerprint']}`", "", f"*{review['safety']}*", ""]
    return "\n".join(lines)


def _html_table(header: list[str], rows: list[list[str]], css: str, status_last: bool = False) -> str:
    head = "".join(f"<th scope='col'>{escape(h)}</th>" for h in header)
    body = "".join(
        (f"<tr class='{'fail' if row[-1] == 'FAIL' else 'pass'}'>" if status_last else "<tr>")
        + "".join(f"<td data-label='{escape(h)}'>{escape(c)}</td>" for h, c in zip(header, row, strict=True))
        + "</tr>"
        for row in rows
    )
    return f"<table class='{css}'><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>"


def render_table_html(review: dict[str, Any]) -> str:
    """The checks, with units, as an HTML table (each cell labelled, so a narrow screen can stack it)."""
    return _html_table(CHECK_HEADER, _check_rows(review), "checks stack", status_last=True)


def render_bom_html(review: dict[str, Any]) -> str:
    """The bill of materials, per channel and for the whole design, as HTML."""
    return "".join(
        f"<h3>{escape(title)}</h3>{_html_table(BOM_HEADER, rows, 'bom stack')}" for title, rows in _bom_sections(review)
    )


def render_cautions_html(review: dict[str, Any]) -> str:
    """The cautions with the standing safety line last, for the place right under the verdict."""
    items = "".join(f"<li>{escape(n)}</li>" for n in review["cautions"])
    return (
        f"<div class='caution' role='note' id='cautions'><h2>Cautions</h2><ul>{items}"
        f"<li class='safety'>{escape(review['safety'])}</li></ul></div>"
    )


def render_html(review: dict[str, Any]) -> str:
    """A standalone page of the same content as the Markdown report."""
    items = lambda notes: "".join(f"<li>{escape(n)}</li>" for n in notes)  # noqa: E731
    parts = items(f"{p['role']}: {p['part_id']} revision {p['revision']} ({p['status']})" for p in review["parts"])
    inputs = "".join(
        f"<tr><th scope='row'>{escape(k)}</th><td>{escape(quantity(v, unit_of(k)))}</td></tr>"
        for k, v in sorted(review["inputs"].items())
    )
    failing = f"<p>Failing checks: {escape(', '.join(review['failing']))}.</p>" if review["failing"] else ""
    warnings = f"<h2>Warnings</h2><ul>{items(review['warnings'])}</ul>" if review["warnings"] else ""
    return (
        "<!doctype html><html lang='en'><head><meta charset='utf-8'>"
        "<meta name='viewport' content='width=device-width, initial-scale=1'>"
        f"<title>Channel review: {escape(review['verdict'])}</title></head><body>"
        f"<h1>Channel review: <span class='verdict {escape(review['verdict'])}'>{escape(review['verdict'].upper())}"
        f"</span></h1>{failing}{render_cautions_html(review)}"
        f"<p>Largest duty cycle the supply allows: {escape(number(review['max_duty_cycle']))}.</p>"
        + (f"<p>{escape(line)}</p>" if (line := switch_line(review)) else "")
        + f"<p>{escape(heat_line(review))}</p>"
        f"<p>{escape(_yield_line(review))}</p>"
        f"<h2>Bill of materials</h2>{render_bom_html(review)}"
        f"<h2>Checks</h2>{render_table_html(review)}{front_stage_html(review, number)}{warnings}"
        f"<h2>Parts</h2><ul>{parts or '<li>none: every value was given explicitly</li>'}</ul>"
        f"<h2>Inputs</h2><table class='inputs'>{inputs}</table>"
        f"<p>Fingerprint: <code>{escape(review['fingerprint'])}</code></p>"
        f"<footer><p>{escape(review['safety'])}</p></footer></body></html>"
    )
