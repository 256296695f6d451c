"""Server-side plots of the calculations as SVG or PNG bytes.

Drawn with matplotlib's object API on figures of their own (no pyplot, so no global figure state). matplotlib
documents that it is not thread-safe, so every drawing holds one lock; the curves come from the core
(calcsvc.core.curves) and the plots only draw them. Each image carries the values it marks in its metadata (SVG
``dc:description``, PNG ``Description``) as ``name=value`` pairs with the exact floats, so a client can read back
what was drawn.
"""

from __future__ import annotations

import functools
import io
import math
import threading
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any, TypeVar

import matplotlib
import numpy as np
from matplotlib.axes import Axes
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
from matplotlib.ticker import EngFormatter, NullFormatter

from calcsvc.core.curves import ClosedLoopCurves, LedCurves, SlewCurves
from calcsvc.core.heat_curves import HeatCurves

FORMATS = {"svg": "image/svg+xml", "png": "image/png"}

# Our own muted palette: ink for text and axes, then one colour per role a curve can play.
INK = "#33363d"
PAPER = "#fbfaf6"
GRID = "#dedbd2"
CURVE = "#2f6f8f"  # the quantity asked about
REFERENCE = "#9a8f7a"  # what it is compared with (open loop, swing limit)
LIMIT = "#b0413e"  # a rating or limit that must not be crossed
OPERATING = "#4b7f52"  # the operating point
BAND = "#c9dbe3"  # worst-case spread

WIDTH_IN, HEIGHT_IN, DPI = 7.2, 4.4, 100
CLOSED_LOOP_PANELS = 2  # gain above phase

_LOCK = threading.Lock()
F = TypeVar("F", bound=Callable[..., Any])


@dataclass(frozen=True)
class Plot:
    """An image and the values it marks, read back from the drawn artists."""

    content: bytes
    mimetype: str
    markers: dict[str, float]


def _operating_point(ax: Any, x: float, y: float, colour: str, label: str) -> Any:
    """The design's own point on a plot, tagged so its position can be read back from the image."""
    (point,) = ax.plot(
        [x], [y], marker="D", markersize=7, color=colour, linestyle="none", label=label, gid="operating-point"
    )
    return point


def unit_symbol(unit: str) -> str:
    """How a unit is written for people: "Ω" for pint's "ohm", nothing for a ratio."""
    return {"dimensionless": "", "ohm": "Ω", "A*h": "A·h"}.get(unit, unit)


def eng(value: float, unit: str) -> str:
    """A value with an SI prefix and its unit ("99.999 kHz"); plain for dimensionless quantities."""
    symbol = unit_symbol(unit)
    if not symbol:
        return f"{value:g}"
    return str(EngFormatter(unit=symbol, sep="\N{NO-BREAK SPACE}")(value))


def _locked(draw: F) -> F:
    @functools.wraps(draw)
    def wrapper(*args: Any, **kwargs: Any) -> Any:
        with _LOCK:
            return draw(*args, **kwargs)

    return wrapper  # type: ignore[return-value]


def _height_in(rows: int) -> float:
    return HEIGHT_IN if rows == 1 else HEIGHT_IN * 1.45


def size_px(rows: int = 1) -> tuple[int, int]:
    """Width and height of a PNG plot of ``rows`` panels (an SVG has the same proportions)."""
    return round(WIDTH_IN * DPI), round(_height_in(rows) * DPI)


def _figure(rows: int = 1) -> tuple[Figure, list[Axes]]:
    figure = Figure(figsize=(WIDTH_IN, _height_in(rows)), dpi=DPI, facecolor=PAPER, layout="constrained")
    FigureCanvasAgg(figure)
    axes = figure.subplots(rows, 1, sharex=True, squeeze=False)[:, 0]
    for ax in axes:
        ax.set_facecolor(PAPER)
        ax.set_axisbelow(True)
        ax.grid(True, which="major", color=GRID, linewidth=0.8)
        ax.grid(True, which="minor", color=GRID, linewidth=0.4, alpha=0.6)
        for side in ("top", "right"):
            ax.spines[side].set_visible(False)
        for side in ("left", "bottom"):
            ax.spines[side].set_color(INK)
        ax.tick_params(colors=INK, labelsize=9)
        ax.xaxis.label.set_color(INK)
        ax.yaxis.label.set_color(INK)
    return figure, list(axes)


def _eng_axis(axis: Any, unit: str) -> None:
    axis.set_major_formatter(EngFormatter(unit=unit_symbol(unit), sep="\N{NO-BREAK SPACE}"))
    axis.set_minor_formatter(NullFormatter())


def _legend(ax: Axes, loc: str = "best") -> None:
    legend = ax.legend(loc=loc, fontsize=8.5, frameon=True, facecolor=PAPER, edgecolor=GRID, labelcolor=INK)
    legend.get_frame().set_linewidth(0.8)


def _title(figure: Figure, title: str) -> None:
    figure.suptitle(title, color=INK, fontsize=11, x=0.02, ha="left")


def _render(figure: Figure, fmt: str, title: str, markers: dict[str, float]) -> Plot:
    if fmt not in FORMATS:
        raise ValueError(f"format must be one of {', '.join(FORMATS)}")
    description = "; ".join(f"{name}={value!r}" for name, value in markers.items())
    metadata: dict[str, Any] = {"Title": title, "Description": description}
    if fmt == "svg":
        metadata.update(Creator="calcsvc", Date=None)  # no date: the same inputs give the same bytes
    else:
        metadata["Software"] = "calcsvc"
    buffer = io.BytesIO()
    # A fixed salt makes the SVG's element ids repeatable; the lock makes the rc change safe.
    with matplotlib.rc_context({"svg.hashsalt": "calcsvc"}):
        figure.savefig(buffer, format=fmt, metadata=metadata, facecolor=PAPER)
    return Plot(buffer.getvalue(), FORMATS[fmt], markers)


@_locked
def closed_loop_plot(curves: ClosedLoopCurves, fmt: str) -> Plot:
    figure, (gain_ax, phase_ax) = _figure(rows=CLOSED_LOOP_PANELS)
    f = curves.frequency_hz
    ol_gain, ol_phase = curves.open_loop_gain_db, curves.open_loop_phase_deg
    ol_label = "open loop (GBW asymptote)" if curves.open_loop_gain is None else "open loop"
    closed_label = "closed loop" if curves.stages == 1 else f"closed loop, {curves.stages} stages"

    gain_ax.plot(f, ol_gain, color=REFERENCE, linewidth=1.6, linestyle="--", label=ol_label)
    gain_ax.plot(f, curves.gain_db, color=CURVE, linewidth=2.0, label=closed_label)
    (corner,) = gain_ax.plot(
        [curves.corner_hz],
        [curves.corner_gain_db],
        marker="o",
        markersize=7,
        color=LIMIT,
        linestyle="none",
        label="−3 dB point",
        gid="minus-3db-point",
    )
    corner_hz = float(corner.get_xdata()[0])
    gain_ax.annotate(
        f"−3 dB at {eng(corner_hz, 'Hz')}",
        (corner_hz, curves.corner_gain_db),
        xytext=(10, 10),
        textcoords="offset points",
        color=LIMIT,
        fontsize=9,
    )
    gain_ax.axvline(corner_hz, color=LIMIT, linewidth=0.8, linestyle=":")
    phase_ax.plot(f, ol_phase, color=REFERENCE, linewidth=1.6, linestyle="--", label=ol_label)
    phase_ax.plot(f, curves.phase_deg, color=CURVE, linewidth=2.0, label=closed_label)
    phase_ax.plot([corner_hz], [curves.corner_phase_deg], marker="o", markersize=6, color=LIMIT, linestyle="none")
    phase_ax.axvline(corner_hz, color=LIMIT, linewidth=0.8, linestyle=":")
    if curves.signal_hz is not None:
        for ax in (gain_ax, phase_ax):
            ax.axvline(curves.signal_hz, color=OPERATING, linewidth=1.2, linestyle="-.", label="signal_hz")

    gain_ax.set_xscale("log")
    gain_ax.set_ylabel("gain [dB]")
    phase_ax.set_ylabel("phase [degrees]")
    phase_ax.set_xlabel("frequency [Hz]")
    phase_ax.set_ylim(min(-95.0, float(np.nanmin(curves.phase_deg)) - 5.0), 5.0)
    _eng_axis(phase_ax.xaxis, "Hz")
    _legend(gain_ax, "lower left")
    title = "Closed-loop gain and phase"
    _title(figure, title)
    markers = {curves.corner_name: corner_hz, "gain_at_corner_db": curves.corner_gain_db}
    return _render(figure, fmt, title, markers)


@_locked
def slew_limit_plot(curves: SlewCurves, fmt: str) -> Plot:
    figure, (ax,) = _figure()
    f = curves.frequency_hz
    ax.fill_between(f, curves.max_amplitude_v, color=BAND, alpha=0.6, linewidth=0, label="undistorted")
    ax.plot(f, curves.slew_limited_amplitude_v, color=CURVE, linewidth=2.0, label="slew limit SR/(k·f)")
    markers: dict[str, float] = {}
    if curves.swing_limited_amplitude_v is not None:
        ax.axhline(
            curves.swing_limited_amplitude_v,
            color=REFERENCE,
            linewidth=1.8,
            linestyle="--",
            label="swing limit (supply/2 − headroom)",
        )
        markers["swing_limited_amplitude_v"] = curves.swing_limited_amplitude_v
    if curves.operating_hz is not None and curves.operating_amplitude_v is not None:
        colour = OPERATING if curves.operating_ok else LIMIT
        verdict = "within limits" if curves.operating_ok else "distorts"
        point = _operating_point(
            ax, curves.operating_hz, curves.operating_amplitude_v, colour, f"operating point ({verdict})"
        )
        markers["frequency_hz"] = float(point.get_xdata()[0])
        markers["amplitude_v"] = float(point.get_ydata()[0])
    ax.set_xscale("log")
    ax.set_yscale("log")
    ax.set_xlim(float(f[0]), float(f[-1]))
    ceiling = float(np.nanmax(curves.max_amplitude_v))
    if curves.operating_amplitude_v is not None:
        ceiling = max(ceiling, curves.operating_amplitude_v)
    ax.set_ylim(top=ceiling * 3.0)
    ax.set_xlabel("frequency [Hz]")
    ax.set_ylabel("peak amplitude [V]")
    _eng_axis(ax.xaxis, "Hz")
    _eng_axis(ax.yaxis, "V")
    _legend(ax)
    title = "Largest undistorted output amplitude"
    _title(figure, title)
    return _render(figure, fmt, title, markers)


@_locked
def led_string_plot(curves: LedCurves, fmt: str) -> Plot:
    figure, (ax,) = _figure()
    vs = curves.supply_v
    low, high = (
        curves.operating_supply_v * (1 - curves.supply_tolerance),
        curves.operating_supply_v * (1 + curves.supply_tolerance),
    )
    ax.fill_between(
        vs,
        curves.current_low_a,
        curves.current_high_a,
        color=BAND,
        alpha=0.75,
        linewidth=0,
        label="worst case (Vf range, resistor tolerance)",
    )
    if curves.supply_tolerance > 0:
        ax.axvspan(low, high, color=REFERENCE, alpha=0.12, linewidth=0, label="supply tolerance")
    ax.plot(vs, curves.current_a, color=CURVE, linewidth=2.0, label=f"nominal, {eng(curves.resistor_ohm, 'ohm')}")
    ax.axhline(curves.if_max_a, color=LIMIT, linewidth=1.6, linestyle="--", label="LED maximum current")
    ax.axvline(curves.operating_supply_v, color=OPERATING, linewidth=1.0, linestyle=":")
    point = _operating_point(
        ax,
        curves.operating_supply_v,
        curves.operating_current_a,
        OPERATING,
        f"operating point {eng(curves.operating_supply_v, 'V')}",
    )
    ax.plot(
        [low, high],
        [curves.worst_min_a, curves.worst_max_a],
        marker="o",
        markersize=6,
        markerfacecolor=PAPER,
        markeredgecolor=INK,
        linestyle="none",
        label="worst case at the supply limits",
    )
    ax.set_xlim(float(vs[0]), float(vs[-1]))
    ax.set_ylim(0.0, max(float(np.nanmax(curves.current_high_a)), curves.if_max_a) * 1.1)
    ax.set_xlabel("supply voltage [V]")
    ax.set_ylabel("string current [A]")
    _eng_axis(ax.xaxis, "V")
    _eng_axis(ax.yaxis, "A")
    _legend(ax)
    title = "LED string current against supply voltage"
    _title(figure, title)
    markers = {
        "supply_v": float(point.get_xdata()[0]),
        "current_a": float(point.get_ydata()[0]),
        "current_min_a": curves.worst_min_a,
        "current_max_a": curves.worst_max_a,
        "resistor_ohm": curves.resistor_ohm,
        "if_max_a": curves.if_max_a,
    }
    return _render(figure, fmt, title, markers)


@_locked
def heat_plot(curves: HeatCurves, fmt: str) -> Plot:
    """Each part's temperature against the ambient, its limit dashed in the same colour, the range shaded."""
    figure, (ax,) = _figure()
    ta = curves.ambient_c
    if curves.ambient_max_c > curves.ambient_min_c:
        ax.axvspan(
            curves.ambient_min_c, curves.ambient_max_c, color=BAND, alpha=0.6, linewidth=0, label="ambient range"
        )
    parts = (
        ("LED junction", curves.led_junction_c, curves.led_limit_c, CURVE, "LED Tj,max − 20 K"),
        (
            "transistor junction",
            curves.transistor_junction_c,
            curves.transistor_limit_c,
            INK,
            "transistor Tj,max − 20 K",
        ),
        ("resistor hot spot", curves.resistor_hot_spot_c, curves.resistor_limit_c, REFERENCE, "resistor zero-power"),
    )
    for label, temperature, limit, colour, limit_label in parts:
        ax.plot(ta, temperature, color=colour, linewidth=2.0, label=label)
        ax.axhline(limit, color=colour, linewidth=1.2, linestyle="--", label=limit_label)
    runaway = np.isnan(curves.led_junction_c)
    if runaway.any():
        ax.axvline(float(ta[np.argmax(runaway)]), color=LIMIT, linewidth=1.6, label="LED string runs away")
    ax.axvline(curves.operating_ambient_c, color=OPERATING, linewidth=1.0, linestyle=":", label="ambient")
    ax.set_xlim(float(ta[0]), float(ta[-1]))
    ax.set_xlabel("ambient [°C]")
    ax.set_ylabel("temperature [°C]")
    _legend(ax, loc="upper left")
    title = "Part temperatures against ambient"
    _title(figure, title)
    at = int(np.argmin(np.abs(ta - curves.operating_ambient_c)))
    markers = {
        "ambient_c": float(ta[at]),
        "led_junction_c": float(curves.led_junction_c[at]),
        "transistor_junction_c": float(curves.transistor_junction_c[at]),
        "resistor_hot_spot_c": float(curves.resistor_hot_spot_c[at]),
        "led_limit_c": curves.led_limit_c,
        "transistor_limit_c": curves.transistor_limit_c,
    }
    return _render(figure, fmt, title, markers)


@_locked
def histogram(values: np.ndarray, limit: float, check_name: str, unit: str, fmt: str) -> Plot:
    """A Monte Carlo check's distribution with its limit marked; ``fmt`` is "svg" or "png"; NaNs are left out."""
    figure, (ax,) = _figure()
    samples = np.asarray(values, dtype=np.float64).ravel()
    finite = samples[np.isfinite(samples)]
    if finite.size:
        low, high = min(float(finite.min()), limit), max(float(finite.max()), limit)
        span = high - low or abs(high) or 1.0
        edges = np.histogram_bin_edges(finite, bins=min(60, max(10, int(math.sqrt(finite.size)))))
        ax.hist(finite, bins=edges, color=CURVE, alpha=0.85, edgecolor=PAPER, linewidth=0.4, label="samples")
        ax.set_xlim(low - 0.05 * span, high + 0.05 * span)
    else:
        ax.text(0.5, 0.5, "no finite samples", transform=ax.transAxes, ha="center", color=INK)
    line = ax.axvline(limit, color=LIMIT, linewidth=2.0, linestyle="--", label=f"limit {eng(limit, unit)}")
    symbol = unit_symbol(unit)
    ax.set_xlabel(f"{check_name} [{symbol}]" if symbol else check_name)
    ax.set_ylabel("samples")
    _eng_axis(ax.xaxis, unit)
    _legend(ax)
    title = f"{check_name}: {finite.size} of {samples.size} samples"
    _title(figure, title)
    markers = {"limit": float(line.get_xdata()[0]), "samples": float(finite.size)}
    return _render(figure, fmt, title, markers)
