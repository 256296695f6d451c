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


def _corner(corner: dict[str, str]) -> str:
    return ", ".join(f"{k} {v}" for k, v in corner.items()) or "—"


def _check_rows(review: dict[str, Any]) -> list[list[str]]:
    return [
        [
            check["name"],
            check["stage"].replace("_", " "),
            number(check["value"]),
            number(check["limit"]),
            _percent(check["margin"]),
            number(check["worst_case"]["value"]),
            _percent(check["worst_case"]["margin"]),
            _corner(check["worst_case"]["corner"]),
            "pass" if check["ok"] else "FAIL",
        ]
        for check in review["checks"]
    ]


CHECK_HEADER = ["check", "stage", "nominal", "limit", "margin", "worst case", "worst margin", "worst corner", "result"]


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


def render_markdown(review: dict[str, Any]) -> str:
    verdict = review["verdict"].upper()
    lines = [f"# Channel review: {verdict}", ""]
    if review["failing"]:
        lines += [f"Failing checks: {', '.join(review['failing'])}.", ""]
    lines += [
        f"Largest duty cycle the supply allows for {review['inputs'].get('channels', 1)} channel(s): "
        f"{number(review['max_duty_cycle'])}.",
        "",
        _yield_line(review),
        "",
        "## Checks",
        "",
        "| " + " | ".join(CHECK_HEADER) + " |",
        "|" + "---|" * len(CHECK_HEADER),
    ]
    lines += ["| " + " | ".join(row) + " |" for row in _check_rows(review)]
    lines += front_stage_markdown(review, number)
    lines += ["", "## Parts", ""]
    lines += [f"- {p['role']}: `{p['part_id']}` revision {p['revision']} ({p['status']})" for p in review["parts"]]
    if not review["parts"]:
        lines.append("- none: every value was given explicitly")
    lines += ["", "## Inputs", "", "| input | value |", "|---|---|"]
    lines += [
        f"| {name} | {number(value)} {unit_of(name)}".rstrip() + " |"
        for name, value in sorted(review["inputs"].items())
    ]
    for title, notes in (("Cautions", review["cautions"]), ("Warnings", review["warnings"])):
        if notes:
            lines += ["", f"## {title}", ""] + [f"- {note}" for note in notes]
    lines += ["", f"Fingerprint: `{review['fingerprint']}`", ""]
    return "\n".join(lines)


def render_table_html(review: dict[str, Any]) -> str:
    head = "".join(f"<th scope='col'>{escape(h)}</th>" for h in CHECK_HEADER)
    body = "".join(
        f"<tr class='{'fail' if row[-1] == 'FAIL' else 'pass'}'>"
        + "".join(f"<td>{escape(c)}</td>" for c in row)
        + "</tr>"
        for row in _check_rows(review)
    )
    return f"<table class='checks'><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>"


def render_html(review: dict[str, Any]) -> str:
    """A standalone page of the same content as the Markdown report."""
    items = lambda notes: "".join(f"<li>{escape(n)}</li>" for n in notes)  # noqa: E731
    parts = items(f"{p['role']}: {p['part_id']} revision {p['revision']} ({p['status']})" for p in review["parts"])
    inputs = "".join(
        f"<tr><th scope='row'>{escape(k)}</th><td>{escape(number(v))} {escape(unit_of(k))}</td></tr>"
        for k, v in sorted(review["inputs"].items())
    )
    failing = f"<p>Failing checks: {escape(', '.join(review['failing']))}.</p>" if review["failing"] else ""
    notes = "".join(
        f"<h2>{title}</h2><ul>{items(found)}</ul>"
        for title, found in (("Cautions", review["cautions"]), ("Warnings", review["warnings"]))
        if found
    )
    return (
        "<!doctype html><html lang='en'><head><meta charset='utf-8'>"
        "<meta name='viewport' content='width=device-width, initial-scale=1'>"
        f"<title>Channel review: {escape(review['verdict'])}</title></head><body>"
        f"<h1>Channel review: <span class='verdict {escape(review['verdict'])}'>{escape(review['verdict'].upper())}"
        f"</span></h1>{failing}"
        f"<p>Largest duty cycle the supply allows: {escape(number(review['max_duty_cycle']))}.</p>"
        f"<p>{escape(_yield_line(review))}</p>"
        f"<h2>Checks</h2>{render_table_html(review)}{front_stage_html(review, number)}"
        f"<h2>Parts</h2><ul>{parts or '<li>none: every value was given explicitly</li>'}</ul>"
        f"<h2>Inputs</h2><table class='inputs'>{inputs}</table>{notes}"
        f"<p>Fingerprint: <code>{escape(review['fingerprint'])}</code></p></body></html>"
    )
