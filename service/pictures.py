"""PNG pictures of fields and curves, drawn with matplotlib's object API (no global state).

matplotlib is imported on first use so that workers that never draw do not pay for it.
Pictures are drawn from the dumped response, so axes and colour bars carry the caller's units.
"""

from __future__ import annotations

import io
from typing import Any

LIMIT_STYLE = {"colors": "crimson", "linestyles": "dashed", "linewidths": 1.5}


def _figure(width: float = 7.0, height: float = 5.5) -> Any:
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure(figsize=(width, height), dpi=110, layout="constrained")
    FigureCanvasAgg(fig)
    return fig


def _png(fig: Any) -> bytes:
    buffer = io.BytesIO()
    fig.savefig(buffer, format="png")
    return buffer.getvalue()


def _limit_levels(body: dict[str, Any]) -> list[tuple[str, float]]:
    return [(check["limit"], check["limit_value"]) for check in body["safety"]["checks"]]


def field_picture(body: dict[str, Any], x: list[float], y: list[float],
                  temperature: list[list[float]], title: str) -> bytes:
    """A colour map with labelled isotherms, the outline, a colour bar and any limits."""
    import numpy as np

    units = body["units"]
    t = np.asarray(temperature, dtype=float)
    fig = _figure()
    ax = fig.add_subplot()
    finite = t[np.isfinite(t)]
    low, high = (float(finite.min()), float(finite.max())) if finite.size else (0.0, 1.0)
    if high - low < 1e-12 * max(1.0, abs(high)):
        high = low + 1.0
    levels = np.linspace(low, high, 21)
    filled = ax.contourf(x, y, t, levels=levels, cmap="inferno")
    lines = ax.contour(x, y, t, levels=levels[::4], colors="white", linewidths=0.6)
    ax.clabel(lines, fmt="%.4g", fontsize=7)
    for name, value in _limit_levels(body):
        if low < value < high:
            limit_line = ax.contour(x, y, t, levels=[value], **LIMIT_STYLE)
            ax.clabel(limit_line, fmt=f"{name} %.4g", fontsize=7)
    ax.plot([x[0], x[-1], x[-1], x[0], x[0]], [y[0], y[0], y[-1], y[-1], y[0]], color="black",
            linewidth=1.2)
    ax.set_aspect("equal", adjustable="box")
    ax.set_xlabel(f"x [{units['length']}]")
    ax.set_ylabel(f"y [{units['length']}]")
    ax.set_title(f"{title} (safety: {body['safety']['status']})")
    colour_bar = fig.colorbar(filled, ax=ax)
    colour_bar.set_label(f"temperature [{units['temperature']}]")
    return _png(fig)


def plate_picture(body: dict[str, Any]) -> bytes:
    grid = body["results"]["grid"]
    return field_picture(body, grid["x"], grid["y"], grid["temperature"],
                         "Steady temperature field")


def profile_picture(body: dict[str, Any]) -> bytes:
    """Temperature through a layered wall: layers shaded and named, limits as lines."""
    results = body["results"]
    units = body["units"]
    fig = _figure(7.0, 4.5)
    ax = fig.add_subplot()
    for i, layer in enumerate(results["layers"]):
        ax.axvspan(layer["inner_position"], layer["outer_position"],
                   color="0.93" if i % 2 else "0.85", zorder=0)
        ax.text(0.5 * (layer["inner_position"] + layer["outer_position"]), 1.0,
                layer["name"] or f"layer {i}", transform=ax.get_xaxis_transform(),
                ha="center", va="bottom", fontsize=8)
    profile = results["profile"]
    ax.plot(profile["positions"], profile["temperatures"], color="black", linewidth=1.5)
    for name, value in _limit_levels(body):
        ax.axhline(value, color="crimson", linestyle="--", linewidth=1.2, label=name)
    frame = "radius" if results["geometry"] in ("cylinder", "sphere") else "depth"
    ax.set_xlabel(f"{frame} [{units['length']}]")
    ax.set_ylabel(f"temperature [{units['temperature']}]")
    ax.set_title(f"Temperature through the {results['geometry']} wall "
                 f"(safety: {body['safety']['status']})", pad=18)
    ax.grid(True, alpha=0.3)
    if _limit_levels(body):
        ax.legend(fontsize=8)
    return _png(fig)


def curves_picture(body: dict[str, Any], times: list[float], series: dict[str, list[float]],
                   title: str) -> bytes:
    """Temperature-time curves with axes, units and limits drawn as horizontal lines."""
    units = body["units"]
    fig = _figure(7.0, 4.5)
    ax = fig.add_subplot()
    for label, values in series.items():
        ax.plot(times, values, label=label)
    for name, value in _limit_levels(body):
        ax.axhline(value, color="crimson", linestyle="--", linewidth=1.2, label=name)
    ax.set_xlabel(f"time [{units['time']}]")
    ax.set_ylabel(f"temperature [{units['temperature']}]")
    ax.set_title(f"{title} (safety: {body['safety']['status']})")
    ax.grid(True, alpha=0.3)
    ax.legend(fontsize=8)
    return _png(fig)
