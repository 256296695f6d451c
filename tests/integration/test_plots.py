"""Plots: images that render, the calculation's own numbers marked on them, errors as problem documents."""

from __future__ import annotations

import io
import math
import threading
import xml.etree.ElementTree as ET
from typing import Any
from urllib.parse import urlencode

import numpy as np
import pytest
from flask import Flask
from flask.testing import FlaskClient
from helpers import assert_problem
from PIL import Image

from calcsvc.core.curves import open_loop
from calcsvc.openapi_spec import generated_spec
from calcsvc.service import curves as service_curves
from calcsvc.web import plots

PNG_MAGIC = b"\x89PNG\r\n\x1a\n"
DC = "{http://purl.org/dc/elements/1.1/}"
OPAMP = {"opamp": "opamp-general-1mhz", "gain": 10}


def svg_markers(content: bytes) -> dict[str, float]:
    """The name=value pairs an SVG plot carries in its metadata (and proof that it parses as XML)."""
    root = ET.fromstring(content)
    assert root.tag == "{http://www.w3.org/2000/svg}svg"
    description = root.find(f".//{DC}description")
    assert description is not None and description.text
    return {k: float(v) for k, v in (pair.split("=") for pair in description.text.split("; "))}


def png_markers(content: bytes, panels: int = 1) -> dict[str, float]:
    assert content.startswith(PNG_MAGIC)
    image = Image.open(io.BytesIO(content))
    assert image.size == plots.size_px(panels)  # the space the review page reserves for it
    return {k: float(v) for k, v in (pair.split("=") for pair in image.info["Description"].split("; "))}


def get_plot(client: FlaskClient, name: str, query: dict[str, Any]) -> Any:
    response = client.get(f"/v1/plots/{name}?{urlencode(query)}")
    assert response.status_code == 200, response.get_data(as_text=True)
    return response


def calc(client: FlaskClient, name: str, query: dict[str, Any]) -> dict[str, Any]:
    response = client.get(f"/v1/calc/{name}?{urlencode(query)}")
    assert response.status_code == 200, response.get_json()
    return response.get_json()


def test_closed_loop_svg_marks_the_calculations_bandwidth(client: FlaskClient, seeded: Any) -> None:
    response = get_plot(client, "closed-loop.svg", OPAMP)
    assert response.mimetype == "image/svg+xml"
    assert response.headers["X-Content-Type-Options"] == "nosniff"
    assert "default-src 'none'" in response.headers["Content-Security-Policy"]
    assert b'id="minus-3db-point"' in response.data
    bandwidth = calc(client, "closed-loop-bandwidth", OPAMP)["results"]["bandwidth_hz"]
    # The same number, not a recomputation: GBW/NG + GBW/A0 = 1.2 MHz/10 + 1.2 MHz/150000 (the seed op-amp).
    assert svg_markers(response.data)["bandwidth_hz"] == bandwidth == pytest.approx(120_008.0)


def test_closed_loop_png_carries_the_same_marker(client: FlaskClient, seeded: Any) -> None:
    response = get_plot(client, "closed-loop.png", OPAMP)
    assert response.mimetype == "image/png"
    bandwidth = calc(client, "closed-loop-bandwidth", OPAMP)["results"]["bandwidth_hz"]
    markers = png_markers(response.data, plots.CLOSED_LOOP_PANELS)
    assert markers["bandwidth_hz"] == bandwidth
    # One pole: the gain at the corner is 3.01 dB (10·log10 2) under the DC gain of 20·log10(9.99933) dB.
    assert markers["gain_at_corner_db"] == pytest.approx(20 * math.log10(10 / (1 + 10 / 150_000)) - 10 * math.log10(2))


def test_cascade_without_open_loop_gain_marks_the_cascade_bandwidth(client: FlaskClient) -> None:
    query = {"gbw_hz": "1 MHz", "gain": 4, "stages": 2, "signal_hz": "20 kHz"}
    markers = svg_markers(get_plot(client, "closed-loop.svg", query).data)
    results = calc(client, "closed-loop-bandwidth", query)["results"]
    assert markers["cascade_bandwidth_hz"] == results["cascade_bandwidth_hz"]
    # Two identical poles at GBW/NG = 250 kHz meet -3 dB at 250 kHz·√(√2 - 1).
    assert markers["cascade_bandwidth_hz"] == pytest.approx(250e3 * math.sqrt(math.sqrt(2) - 1))


def test_open_loop_curve_is_the_single_pole_or_the_gbw_asymptote() -> None:
    f = np.array([1.0, 5.0, 1e3, 1e6])
    gain_db, phase_deg = open_loop(f, 1e6, 2e5)
    # The pole sits at GBW/A0 = 5 Hz: 3 dB down and 45° there, unity gain at the GBW.
    assert gain_db[1] == pytest.approx(20 * math.log10(2e5) - 10 * math.log10(2))
    assert phase_deg[1] == pytest.approx(-45.0)
    assert gain_db[3] == pytest.approx(0.0, abs=1e-4)
    asymptote_db, asymptote_phase = open_loop(f, 1e6, None)
    assert asymptote_db.tolist() == pytest.approx([120.0, 20 * math.log10(2e5), 60.0, 0.0])
    assert set(asymptote_phase) == {-90.0}


def test_slew_limit_plot_draws_both_limits_and_the_operating_point(
    app: Flask, client: FlaskClient, seeded: Any
) -> None:
    # SI numbers: the curve builders below take the inputs as the query schema loads them.
    query = {"opamp": "opamp-general-1mhz", "supply_v": 12.0, "frequency_hz": 1000.0, "amplitude_v": 1.0}
    markers = svg_markers(get_plot(client, "slew-limit.svg", query).data)
    # Swing: 12 V / 2 - 1.4 V headroom of the seed op-amp.
    assert markers == {"swing_limited_amplitude_v": 4.6, "frequency_hz": 1000.0, "amplitude_v": 1.0}
    curves = service_curves.slew_curves(app.extensions["calcsvc.db"], query)
    f = curves.frequency_hz
    assert f[0] < 1000.0 < f[-1]
    # A sine's steepest slope is 2π·f·Vp, so the slew-limited peak is SR/(2π·f) with SR = 0.6 V/µs.
    assert curves.slew_limited_amplitude_v == pytest.approx(6e5 / (2 * math.pi * f))
    assert curves.max_amplitude_v == pytest.approx(np.minimum(curves.slew_limited_amplitude_v, 4.6))
    assert curves.operating_ok


def test_slew_limit_operating_point_that_distorts(app: Flask, client: FlaskClient) -> None:
    query = {"slew_rate_v_per_s": 5e5, "supply_v": 12.0, "frequency_hz": 50e3, "amplitude_v": 4.0}
    assert get_plot(client, "slew-limit.png", query).data.startswith(PNG_MAGIC)
    assert not service_curves.slew_curves(app.extensions["calcsvc.db"], query).operating_ok


def test_led_string_band_meets_the_calculations_worst_case(app: Flask, client: FlaskClient, seeded: Any) -> None:
    query = {"led": "led-red-5mm", "supply": "supply-adapter-12v-2a", "leds_in_series": 3, "current_a": 0.02}
    response = get_plot(client, "led-string.svg", query)
    results = calc(client, "led-string", query)["results"]
    markers = svg_markers(response.data)
    # (12 V - 3 × 2.0 V) / 20 mA = 300 Ω, an E24 value, so the nominal current is the target.
    assert markers["resistor_ohm"] == results["resistor_ohm"] == 300.0
    assert markers["current_a"] == results["current_a"]
    assert markers["if_max_a"] == 0.03
    curves = service_curves.led_curves(app.extensions["calcsvc.db"], query)
    vs, tolerance = curves.operating_supply_v, curves.supply_tolerance
    # The shaded band's edges at the supply's tolerance limits are the calculation's worst-case currents.
    assert np.interp(vs * (1 - tolerance), curves.supply_v, curves.current_low_a) == pytest.approx(
        results["current_min_a"]
    )
    assert np.interp(vs * (1 + tolerance), curves.supply_v, curves.current_high_a) == pytest.approx(
        results["current_max_a"]
    )
    assert np.interp(vs, curves.supply_v, curves.current_a) == pytest.approx(results["current_a"])
    assert (curves.current_low_a <= curves.current_a).all() and (curves.current_a <= curves.current_high_a).all()


@pytest.mark.parametrize(
    ("name", "query", "status", "field"),
    [
        ("closed-loop.svg", {"gain": 10}, 422, "gbw_hz"),
        ("closed-loop.png", {"gbw_hz": "1 MHz", "gain": 0.5}, 422, "gain"),
        ("closed-loop.svg", {"gbw_hz": "1 kV", "gain": 2}, 422, "gbw_hz"),
        ("closed-loop.svg", {"gbw_hz": 1e308, "gain": 2}, 422, "gbw_hz"),  # the axis would end at infinity
        ("slew-limit.svg", {"slew_rate_v_per_s": 1e6, "supply_v": 2, "output_headroom_v": 1.5}, 422, "supply_v"),
        ("led-string.png", {"led": "no-such-led", "supply_v": 12, "leds_in_series": 1, "current_a": 0.01}, 404, "led"),
    ],
)
def test_bad_inputs_are_problems_naming_the_field(
    client: FlaskClient, name: str, query: dict[str, Any], status: int, field: str
) -> None:
    assert_problem(client.get(f"/v1/plots/{name}?{urlencode(query)}"), status, field)


def test_histogram_marks_the_limit_and_leaves_out_nans() -> None:
    rng = np.random.default_rng(7)
    values = rng.normal(0.025, 0.002, 2000)
    values[:5] = np.nan
    svg = plots.histogram(values, 0.03, "led_current_rating", "A", "svg").content
    assert svg_markers(svg) == {"limit": 0.03, "samples": 1995.0}
    png = plots.histogram(values, 0.03, "led_current_rating", "A", "png").content
    assert png.startswith(PNG_MAGIC)
    assert plots.histogram(np.array([np.nan]), 1.0, "saturation_margin", "", "png").content.startswith(PNG_MAGIC)
    with pytest.raises(ValueError, match="format"):
        plots.histogram(values, 0.03, "led_current_rating", "A", "gif")


def test_concurrent_renders_are_identical(app: Flask) -> None:
    """One lock around matplotlib: threads drawing at once get the same bytes as one drawing alone."""
    query = {"gbw_hz": 1e6, "gain": 10}
    curves = service_curves.closed_loop_curves(app.extensions["calcsvc.db"], query)
    alone = plots.closed_loop_plot(curves, "svg").content
    results: list[bytes] = []

    def draw() -> None:
        results.append(plots.closed_loop_plot(curves, "svg").content)

    threads = [threading.Thread(target=draw) for _ in range(6)]
    for thread in threads:
        thread.start()
    for thread in threads:
        thread.join()
    assert results == [alone] * 6


def test_plots_are_in_the_openapi_document() -> None:
    paths = generated_spec()["paths"]
    for name in ("closed-loop", "slew-limit", "led-string"):
        for fmt, mimetype in (("svg", "image/svg+xml"), ("png", "image/png")):
            operation = paths[f"/v1/plots/{name}.{fmt}"]["get"]
            assert list(operation["responses"]["200"]["content"]) == [mimetype]
            assert "422" in operation["responses"]
    parameters = {p["name"] for p in paths["/v1/plots/closed-loop.svg"]["get"]["parameters"]}
    assert {"opamp", "opamp_revision", "gain", "gbw_hz", "stages"} <= parameters
