"""Server-side SVG figures for reports: lateral profile, cross-section drawing, route plan view.

Every function takes plain values in the API's names and units (``offset_m``,
``e_kv_m``, ``b_ut``, the request's ``cross_section`` mapping, GeoJSON mappings) and
returns one self-contained ``<svg>`` element as text, ready to inline in HTML:

* matplotlib's object API (:class:`matplotlib.figure.Figure` rendered by the SVG
  backend), never ``pyplot``, so no global figure state; rendering is serialised by a
  lock because matplotlib does not promise thread safety (gunicorn threads).
* Text is drawn as glyph outlines (matplotlib's default ``svg.fonttype = "path"``):
  the figure looks the same in any browser and in print, whatever fonts are installed,
  and needs no font files.  The numbers are also in the report's tables as text.
* Legible in black and white: curves differ by line style and marker, zones by
  hatching, thresholds are labelled on the line; colour only repeats that.
* Element ids are rewritten with a per-figure prefix, so several figures can be
  inlined in one page without id clashes, and output is deterministic.
"""

from __future__ import annotations

import hashlib
import html
import io
import math
import re
import threading
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
from matplotlib.backends.backend_svg import FigureCanvasSVG
from matplotlib.figure import Figure
from matplotlib.patches import Circle, PathPatch, Rectangle
from matplotlib.path import Path as MplPath

_RENDER_LOCK = threading.Lock()

# Line styles that stay distinguishable in grey-scale print.
_THRESHOLD_STYLES = ((0, (6, 3)), (0, (2, 2)), (0, (8, 3, 2, 3)), (0, (1, 1)), (0, (10, 2, 2, 2, 2, 2)))
_CURVE_STYLES = (("-", "o"), ("--", "s"), ("-.", "^"), (":", "D"), ((0, (6, 2, 1, 2)), "v"))
_HATCHES = ("////", "\\\\\\\\", "xxx", "...", "---", "|||")
_INK = "#000000"
_GREY = "#555555"
_FILL_GREYS = ("#d9d9d9", "#bdbdbd", "#f0f0f0", "#a6a6a6", "#e6e6e6", "#cccccc")
_FONT_SIZE = 9


@dataclass(frozen=True)
class Threshold:
    """A horizontal threshold line: ``label`` (e.g. "ICNIRP 2010 public"), value in the plot's unit."""

    label: str
    value: float


# --------------------------------------------------------------------------- helpers


def _figure(width_in: float, height_in: float) -> Figure:
    fig = Figure(figsize=(width_in, height_in), dpi=96, layout="constrained")
    FigureCanvasSVG(fig)
    return fig


def _svg_text(fig: Figure, prefix: str, title: str) -> str:
    """Render ``fig`` to an inline ``<svg>`` element with prefixed ids and a ``<title>``."""
    buf = io.StringIO()
    with _RENDER_LOCK:
        fig.savefig(buf, format="svg", metadata={"Date": None, "Creator": None})
    svg = buf.getvalue()
    svg = svg[svg.index("<svg"):]  # drop XML declaration and DOCTYPE (not allowed inline)
    svg = re.sub(r"<metadata>.*?</metadata>\s*", "", svg, flags=re.S)
    svg = re.sub(r"<!--.*?-->\s*", "", svg, flags=re.S)  # text comments repeat labels; not needed
    # Ids unique per figure content, so that several figures inline in one page never share one
    # (a shared glyph or clip-path id would make one figure draw with another's definitions).
    prefix = f"{prefix}-{hashlib.sha256(svg.encode()).hexdigest()[:10]}"
    ids: dict[str, str] = {}
    for match in re.finditer(r'\bid="([^"]+)"', svg):
        ids.setdefault(match.group(1), f"{prefix}-{len(ids) + 1}")

    def rename_id(m: re.Match) -> str:
        return f'id="{ids[m.group(1)]}"'

    def rename_ref(m: re.Match) -> str:
        return m.group(0).replace("#" + m.group(2), "#" + ids.get(m.group(2), m.group(2)))

    svg = re.sub(r'\bid="([^"]+)"', rename_id, svg)
    svg = re.sub(r'(url\(#|href="#)([^)"]+)', rename_ref, svg)
    # Scale with the page: width 100 % of the container, height from the viewBox ratio.
    svg = re.sub(r'<svg ([^>]*?)width="[^"]*" height="[^"]*"', r'<svg \1', svg, count=1)
    safe_title = html.escape(title, quote=True)
    svg = svg.replace(">", f' role="img" aria-label="{safe_title}" class="figure-svg"><title>{safe_title}</title>', 1)
    return svg


def _label(text: object) -> str:
    """User text for matplotlib: ``$`` escaped so that it is never parsed as mathtext."""
    return str(text).replace("$", r"\$")


def _finite(values: Iterable[float | None]) -> np.ndarray:
    arr = np.array([np.nan if v is None else float(v) for v in values], dtype=float)
    return arr


def _style_axes(ax) -> None:
    ax.tick_params(labelsize=_FONT_SIZE, direction="in", top=True, right=True)
    ax.grid(True, color="#bbbbbb", linewidth=0.5, linestyle=":")
    for spine in ax.spines.values():
        spine.set_color(_INK)
        spine.set_linewidth(0.8)


def _fmt(value: float, unit: str) -> str:
    if value == 0 or not math.isfinite(value):
        return f"{value:g} {unit}"
    digits = max(0, 2 - int(math.floor(math.log10(abs(value)))))
    return f"{value:.{min(digits, 4)}f} {unit}"


# --------------------------------------------------------------------------- lateral profile


def _profile_panel(ax, offset_m: np.ndarray, values: np.ndarray, *, quantity: str, unit: str,
                   thresholds: Sequence[Threshold], right_of_way: Mapping[str, float] | None,
                   curve_label: str, style: tuple) -> None:
    linestyle, marker = style
    n = len(offset_m)
    every = max(1, n // 16)
    ax.plot(offset_m, values, color=_INK, linewidth=1.6, linestyle=linestyle, marker=marker,
            markersize=4, markevery=every, markerfacecolor="white", label=curve_label)
    finite = np.isfinite(values)
    data_max = float(np.max(values[finite])) if finite.any() else 0.0
    top = data_max * 1.12 if data_max > 0 else 1.0
    off_scale: list[str] = []
    for k, th in enumerate(thresholds):
        if th.value <= 4.0 * max(data_max, 1e-300):
            top = max(top, th.value * 1.12)
    for k, th in enumerate(thresholds):
        if th.value <= top:
            ax.axhline(th.value, color=_GREY, linewidth=1.1, linestyle=_THRESHOLD_STYLES[k % len(_THRESHOLD_STYLES)])
            ax.annotate(f"limit {_fmt(th.value, unit)}: {_label(th.label)}", xy=(0.01, th.value),
                        xycoords=("axes fraction", "data"), xytext=(2, 2), textcoords="offset points",
                        fontsize=_FONT_SIZE - 1, color=_INK, va="bottom", ha="left",
                        bbox=_LABEL_BOX)
        else:
            off_scale.append(f"{_fmt(th.value, unit)}: {_label(th.label)}")
    if finite.any() and data_max > 0:
        i = int(np.nanargmax(values))
        ax.plot([offset_m[i]], [values[i]], marker="v", color=_INK, markersize=6, linestyle="none")
        ax.annotate(f"max {_fmt(data_max, unit)} at {offset_m[i]:+.1f} m", xy=(offset_m[i], values[i]),
                    xytext=(0, 6), textcoords="offset points", ha="center", va="bottom",
                    fontsize=_FONT_SIZE - 1, color=_INK,
                    bbox={"boxstyle": "round,pad=0.15", "facecolor": "white", "edgecolor": "none", "alpha": 0.85})
    if right_of_way:
        for edge, key in (("left", "left_m"), ("right", "right_m")):
            if right_of_way.get(key) is not None:
                x_edge = float(right_of_way[key])
                ax.axvline(x_edge, color=_INK, linewidth=0.9, linestyle=(0, (4, 1, 1, 1)))
                ax.annotate(f"right-of-way edge {x_edge:+.1f} m", xy=(x_edge, 0.5), xycoords=("data", "axes fraction"),
                            xytext=(-3 if edge == "left" else 3, 0), textcoords="offset points", rotation=90,
                            ha="right" if edge == "left" else "left", va="center", fontsize=_FONT_SIZE - 1.5,
                            color=_INK)
    ax.axvline(0.0, color=_GREY, linewidth=0.6, linestyle=":")
    ax.set_ylim(0.0, top * 1.08)
    ax.set_ylabel(f"{quantity} ({unit})", fontsize=_FONT_SIZE)
    if off_scale:
        ax.text(0.99, 0.97, "limits above the plot area:\n" + "\n".join(off_scale), transform=ax.transAxes,
                ha="right", va="top", fontsize=_FONT_SIZE - 1, color=_INK,
                bbox={"boxstyle": "round,pad=0.3", "facecolor": "white", "edgecolor": _GREY, "linewidth": 0.5})
    _style_axes(ax)


def lateral_profile_figure(offset_m: Sequence[float], e_kv_m: Sequence[float] | None, b_ut: Sequence[float] | None, *,
                        e_thresholds: Sequence[Threshold] = (), b_thresholds: Sequence[Threshold] = (),
                        right_of_way: Mapping[str, float] | None = None, height_m: float | None = None,
                        quantity_label: str = "resultant",
                        offset_label: str = "lateral offset from centre line") -> Figure:
    """Lateral profile of E [kV/m] (upper panel) and B [µT] (lower panel) against offset [m].

    Parameters
    ----------
    offset_m : sequence of float
        Offsets across the line [m], increasing.
    e_kv_m, b_ut : sequence of float, or None
        Field values at those offsets; a panel is left out when its sequence is None.
    e_thresholds, b_thresholds : sequence of Threshold
        Reference levels to draw as labelled horizontal lines [kV/m] / [µT].  A level
        more than 4 times above the largest value is listed as "above plot" instead of
        flattening the curve.
    right_of_way : mapping with ``left_m``/``right_m``, optional
        Offsets of the right-of-way edges [m], drawn as vertical lines when given.
    height_m : float, optional
        Evaluation height above ground [m], stated in the x-axis label.

    Returns
    -------
    Figure
        The figure (:func:`lateral_profile_svg` renders it to an ``<svg>`` element).
    """
    x = _finite(offset_m)
    panels = [(p, q, u, th) for p, q, u, th in (
        (e_kv_m, f"E {quantity_label}", "kV/m", e_thresholds),
        (b_ut, f"B {quantity_label}", "µT", b_thresholds)) if p is not None]
    if not panels:
        raise ValueError("lateral_profile_svg needs e_kv_m or b_ut")
    fig = _figure(9.0, 2.9 * len(panels) + 0.5)
    axes = fig.subplots(len(panels), 1, sharex=True, squeeze=False)[:, 0]
    for k, (ax, (values, quantity, unit, thresholds)) in enumerate(zip(axes, panels)):
        _profile_panel(ax, x, _finite(values), quantity=quantity, unit=unit, thresholds=thresholds,
                       right_of_way=right_of_way, curve_label=quantity, style=_CURVE_STYLES[k])
    xlabel = f"{offset_label} (m)"
    if height_m is not None:
        xlabel += f", {height_m:g} m above ground"
    axes[-1].set_xlabel(xlabel, fontsize=_FONT_SIZE)
    axes[-1].set_xlim(float(np.nanmin(x)), float(np.nanmax(x)))
    return fig


def lateral_profile_svg(*args: Any, title: str = "Lateral profile", **kwargs: Any) -> str:
    """:func:`lateral_profile_figure` rendered as one inline ``<svg>`` element (``title`` becomes its accessible name)."""
    return _svg_text(lateral_profile_figure(*args, **kwargs), "profile", title)


def load_cases_svg(cases: Sequence[tuple[str, Sequence[float], Sequence[float]]], *, unit: str = "µT",
                   quantity: str = "B resultant", thresholds: Sequence[Threshold] = (),
                   title: str = "Results per load case") -> str:
    """Overlay one profile per load case: ``cases`` = [(label, offset_m, values), ...].

    Each case gets its own line style and marker, so the figure reads in grey scale.
    """
    fig = _figure(9.0, 3.2)
    ax = fig.add_subplot()
    top = 0.0
    for k, (label, offs, vals) in enumerate(cases):
        ls, mk = _CURVE_STYLES[k % len(_CURVE_STYLES)]
        x, y = _finite(offs), _finite(vals)
        ax.plot(x, y, color=_INK, linestyle=ls, marker=mk, markevery=max(1, len(x) // 14), markersize=4,
                markerfacecolor="white", linewidth=1.4, label=_label(label))
        if np.isfinite(y).any():
            top = max(top, float(np.nanmax(y)))
    for k, th in enumerate(thresholds):
        if th.value <= 4 * max(top, 1e-300):
            ax.axhline(th.value, color=_GREY, linestyle=_THRESHOLD_STYLES[k % len(_THRESHOLD_STYLES)],
                       linewidth=1.1, label=f"{_label(th.label)}: {_fmt(th.value, unit)}")
    ax.set_ylim(bottom=0.0)
    ax.set_xlabel("lateral offset from centre line (m)", fontsize=_FONT_SIZE)
    ax.set_ylabel(f"{quantity} ({unit})", fontsize=_FONT_SIZE)
    ax.legend(loc="upper left", bbox_to_anchor=(1.0, 1.0), fontsize=_FONT_SIZE - 1, frameon=False, handlelength=3.2)
    _style_axes(ax)
    return _svg_text(fig, "cases", title)


# --------------------------------------------------------------------------- cross-section drawing


def bundle_positions_m(count: int, spacing_m: float | None) -> np.ndarray:
    """Subconductor positions relative to the bundle centre [m], shape (count, 2).

    Same layout as :class:`models.geometry.Bundle`: on a circle of radius
    ``spacing_m / (2 sin(pi/count))`` at angles ``pi/count - pi/2 + 2 pi k/count``.
    """
    if count <= 1 or not spacing_m:
        return np.zeros((1, 2))
    radius = spacing_m / (2.0 * math.sin(math.pi / count))
    angles = math.pi / count - math.pi / 2 + 2 * math.pi * np.arange(count) / count
    return np.column_stack([radius * np.cos(angles), radius * np.sin(angles)])


def _ground_hatch(ax, x0: float, x1: float, depth: float) -> None:
    ax.add_patch(Rectangle((x0, -depth), x1 - x0, depth, facecolor="white", edgecolor=_GREY,
                           hatch="////", linewidth=0.0, zorder=0))
    ax.plot([x0, x1], [0, 0], color=_INK, linewidth=2.0, zorder=1, label="ground (height 0)")


def cross_section_figure(cross_section: Mapping[str, Any], *, evaluation_heights_m: Sequence[float] = (),
                      extent_m: tuple[float, float] | None = None,
                      right_of_way: Mapping[str, float] | None = None) -> Figure:
    """Drawing of the cross-section to scale (equal aspect): conductors, bundles, earth wires, ground.

    Parameters
    ----------
    cross_section : mapping
        The request's ``cross_section`` (``circuits`` with ``conductors``, ``bundle``,
        ``kind``, ``voltage_kv``, ``current_a``; ``earth_wires``), API names and units.
    evaluation_heights_m : sequence of float
        Heights of the evaluation line(s) above ground [m], drawn dashed.
    extent_m : (float, float), optional
        Horizontal range to show [m] (e.g. the profile's from/to); default: around the conductors.
    right_of_way : mapping with ``left_m``/``right_m``, optional
        Right-of-way edges, drawn as vertical lines and dimensioned.

    Notes
    -----
    Bundles are far smaller than the structure, so the main drawing marks each bundle
    centre; an enlarged inset shows every distinct bundle with its subconductors to scale.
    """
    circuits = list(cross_section.get("circuits", ()))
    earth = list(cross_section.get("earth_wires", ()) or ())
    xs = [float(c["offset_m"]) for ci in circuits for c in ci["conductors"]] + [float(w["offset_m"]) for w in earth]
    ys = [float(c["height_m"]) for ci in circuits for c in ci["conductors"]] + [float(w["height_m"]) for w in earth]
    if not xs:
        raise ValueError("cross_section has no conductors")
    span = max(max(xs) - min(xs), 10.0)
    centre_x = (max(xs) + min(xs)) / 2
    margin = max(0.5 * span, 0.4 * max(max(ys), 1.0), 8.0)
    lo, hi = min(xs) - margin, max(xs) + margin
    if extent_m is not None:  # never wider than needed to show the conductors well
        lo, hi = max(lo, float(extent_m[0])), min(hi, float(extent_m[1]))
        lo, hi = min(lo, min(xs) - 2.0), max(hi, max(xs) + 2.0)
    if right_of_way:
        lo = min(lo, float(right_of_way.get("left_m", lo)) - 2.0)
        hi = max(hi, float(right_of_way.get("right_m", hi)) + 2.0)
    top = max(max(ys), 0.0) * 1.15 + 2.0
    bottom = min(min(ys), 0.0)
    depth = max(2.0, -bottom * 1.3 + 0.5, 0.04 * (top - bottom))

    width_m, height_m = hi - lo, top + depth
    # Main drawing on the left (equal aspect); enlarged bundle details in a narrow column.
    circuits_with_bundles = {(int((ci.get("bundle") or {}).get("count", 1) or 1),
                              (ci.get("bundle") or {}).get("spacing_m"),
                              (ci.get("bundle") or {}).get("subconductor_diameter_m"))
                             for ci in circuits if int((ci.get("bundle") or {}).get("count", 1) or 1) > 1}
    fig_w = 9.0
    main_w = fig_w * (0.78 if circuits_with_bundles else 1.0)
    fig_h = min(max((main_w - 1.0) * height_m / width_m + 1.9, 3.6), 8.0)
    fig = _figure(fig_w, fig_h)
    if circuits_with_bundles:
        grid = fig.add_gridspec(max(len(circuits_with_bundles), 2), 2, width_ratios=(4.2, 1.0))
        ax = fig.add_subplot(grid[:, 0])
        detail_axes = [fig.add_subplot(grid[k, 1]) for k in range(len(circuits_with_bundles))]
    else:
        ax = fig.add_subplot()
        detail_axes = []
    _ground_hatch(ax, lo, hi, depth)

    markers = ("o", "s", "D", "^", "v", "P")
    stacked = 0
    for ci_index, circuit in enumerate(circuits):
        bundle = circuit.get("bundle") or {}
        count = int(bundle.get("count", 1) or 1)
        mk = markers[ci_index % len(markers)]
        underground = circuit.get("kind") == "underground"
        desc = (f"circuit {_label(circuit.get('id', ci_index + 1))}: {float(circuit.get('voltage_kv', 0)):g} kV, "
                f"{float(circuit.get('current_a', 0)):g} A")
        if count > 1:
            desc += f", {count}-bundle"
        if underground:
            desc += " (underground)"
        first = True
        for cond in circuit["conductors"]:
            x, y = float(cond["offset_m"]), float(cond["height_m"])
            ax.plot([x], [y], marker=mk, markersize=7, color=_INK,
                    markerfacecolor="white" if ci_index % 2 else _INK, linestyle="none",
                    label=desc if first else None, zorder=4)
            first = False
            # Labels point away from the centre line; near it (within 5 % of the width) they go above.
            side = 0 if abs(x - centre_x) < 0.05 * span else (-1 if x < centre_x else 1)
            lift = 0
            if not side:  # stack the labels of conductors close to the centre line
                lift = 7 + 11 * stacked
                stacked += 1
            ax.annotate(f"{_label(cond.get('phase', ''))} ({x:+.1f}, {y:.1f})", xy=(x, y),
                        xytext=(7 * side, lift), textcoords="offset points",
                        ha={-1: "right", 0: "center", 1: "left"}[side], va="center" if side else "bottom", fontsize=_FONT_SIZE - 1.5, color=_INK, zorder=5,
                        bbox=_LABEL_BOX)
    for k, wire in enumerate(earth):
        x, y = float(wire["offset_m"]), float(wire["height_m"])
        ax.plot([x], [y], marker="^", markersize=7, color=_INK, markerfacecolor="white", linestyle="none",
                label="earth wire" if k == 0 else None, zorder=4)
        ax.annotate(f"earth wire ({x:+.1f}, {y:.1f})", xy=(x, y), xytext=(7, 0), textcoords="offset points",
                    va="center",
                    fontsize=_FONT_SIZE - 1.5, color=_INK, zorder=5)

    for k, h in enumerate(sorted(set(float(h) for h in evaluation_heights_m))):
        ax.plot([lo, hi], [h, h], color=_INK, linewidth=1.0, linestyle=(0, (5, 3)),
                label="evaluation height" if k == 0 else None, zorder=2)
        ax.annotate(f"evaluation height {h:g} m", xy=(lo, h), xytext=(4, 3), textcoords="offset points",
                    fontsize=_FONT_SIZE - 1, color=_INK)

    # Dimension: clearance of the lowest overhead conductor above ground.
    overhead = [(float(c["offset_m"]), float(c["height_m"])) for ci in circuits if ci.get("kind") != "underground"
                for c in ci["conductors"]]
    if overhead:
        xl, yl = min(overhead, key=lambda p: p[1])
        ax.annotate("", xy=(xl, 0), xytext=(xl, yl), arrowprops={"arrowstyle": "<|-|>", "color": _INK, "lw": 0.8,
                                                              "shrinkA": 0, "shrinkB": 0})
        ax.text(xl, yl * 0.75, f"{yl:.1f} m ", fontsize=_FONT_SIZE - 1, va="center", ha="right", color=_INK,
                bbox={"boxstyle": "round,pad=0.1", "facecolor": "white", "edgecolor": "none", "alpha": 0.85})
    if len(xs) > 1:
        y_dim = top - 0.8
        ax.annotate("", xy=(min(xs), y_dim), xytext=(max(xs), y_dim),
                    arrowprops={"arrowstyle": "<|-|>", "color": _INK, "lw": 0.8, "shrinkA": 0, "shrinkB": 0})
        ax.text((min(xs) + max(xs)) / 2, y_dim, f"{max(xs) - min(xs):.1f} m", ha="center", va="bottom",
                fontsize=_FONT_SIZE - 1, color=_INK)
    if right_of_way:
        left, right = right_of_way.get("left_m"), right_of_way.get("right_m")
        lowest = min((p[1] for p in overhead), default=top / 2)
        y_row = max(0.35 * lowest, 1.0 + 0.04 * top)
        for v in (left, right):
            if v is not None:
                ax.plot([v, v], [0, 2 * y_row], color=_INK, linewidth=0.9, linestyle=(0, (4, 1, 1, 1)),
                        label="right-of-way edge" if v == left else None)
        if left is not None and right is not None:
            ax.annotate("", xy=(left, y_row), xytext=(right, y_row),
                        arrowprops={"arrowstyle": "<|-|>", "color": _INK, "lw": 0.7, "shrinkA": 0, "shrinkB": 0})
            ax.text((left + right) / 2, y_row, f"right-of-way {right - left:.1f} m", ha="center", va="bottom",
                    fontsize=_FONT_SIZE - 1, color=_INK,
                    bbox={"boxstyle": "round,pad=0.1", "facecolor": "white", "edgecolor": "none", "alpha": 0.85})

    ax.set_xlim(lo, hi)
    ax.set_ylim(-depth, top)
    ax.set_aspect("equal", adjustable="box")
    ax.set_xlabel("offset from centre line (m); drawn to scale, equal horizontal and vertical scales",
                  fontsize=_FONT_SIZE)
    ax.set_ylabel("height above ground (m)", fontsize=_FONT_SIZE)
    handles, labels = ax.get_legend_handles_labels()
    fig.legend(handles, labels, loc="outside lower center", fontsize=_FONT_SIZE - 1, frameon=False, ncol=3)
    _style_axes(ax)

    for inset, (count, spacing, diameter) in zip(detail_axes, sorted(circuits_with_bundles, key=str)):
        circuit_ids = [str(ci.get("id", k + 1)) for k, ci in enumerate(circuits)
                       if (int((ci.get("bundle") or {}).get("count", 1) or 1), (ci.get("bundle") or {}).get("spacing_m"),
                           (ci.get("bundle") or {}).get("subconductor_diameter_m")) == (count, spacing, diameter)]
        pos = bundle_positions_m(count, spacing)
        radius = float(diameter or 0.03) / 2
        size = float(np.max(np.abs(pos))) + radius
        for px, py in pos:
            inset.add_patch(Circle((px, py), radius, facecolor=_INK, edgecolor=_INK))
        if spacing:
            inset.annotate("", xy=tuple(pos[0]), xytext=tuple(pos[1]),
                           arrowprops={"arrowstyle": "<|-|>", "lw": 0.6, "color": _GREY, "shrinkA": 0, "shrinkB": 0})
        inset.set_xlim(-size * 1.6, size * 1.6)
        inset.set_ylim(-size * 1.6, size * 1.6)
        inset.set_aspect("equal")
        inset.set_xticks([])
        inset.set_yticks([])
        inset.set_title(f"bundle of circuit {_label(', '.join(circuit_ids))}\n{count} x {float(diameter or 0) * 1000:.1f} mm, "
                        f"spacing {float(spacing or 0):.2f} m\n(enlarged, to scale)", fontsize=_FONT_SIZE - 2, pad=3)
    return fig


def cross_section_svg(*args: Any, title: str = "Cross-section drawing", **kwargs: Any) -> str:
    """:func:`cross_section_figure` rendered as one inline ``<svg>`` element (``title`` becomes its accessible name)."""
    return _svg_text(cross_section_figure(*args, **kwargs), "section", title)


# --------------------------------------------------------------------------- route plan view


def _rings(geometry: Mapping[str, Any]) -> list[list[list[tuple[float, float]]]]:
    """Polygons of a GeoJSON Polygon/MultiPolygon as lists of rings of (x, y)."""
    kind = geometry.get("type")
    if kind == "Polygon":
        polys = [geometry["coordinates"]]
    elif kind == "MultiPolygon":
        polys = geometry["coordinates"]
    else:
        return []
    return [[[(float(p[0]), float(p[1])) for p in ring] for ring in poly] for poly in polys]


def _polygon_path(rings: list[list[tuple[float, float]]]) -> MplPath:
    verts, codes = [], []
    for ring in rings:
        if len(ring) < 3:
            continue
        verts.extend(ring)
        codes.extend([MplPath.MOVETO] + [MplPath.LINETO] * (len(ring) - 2) + [MplPath.CLOSEPOLY])
    return MplPath(np.array(verts, dtype=float), codes)


_LABEL_BOX = {"boxstyle": "round,pad=0.1", "facecolor": "white", "edgecolor": "none", "alpha": 0.9}


def route_plan_figure(supports: Sequence[Mapping[str, Any]], *, path: Sequence[tuple[float, float]] | None = None,
                   receptors: Sequence[Mapping[str, Any]] = (), zones: Mapping[str, Any] | None = None,
                   geographic: bool = False, edges: Sequence[Sequence[tuple[float, float]]] = ()) -> Figure:
    """Plan view of a route: centre line through the supports, evaluation path, receptors, exposure zones,
    right-of-way edges.

    Parameters
    ----------
    supports : sequence of mapping
        ``{"id", "x", "y"}`` in the request's CRS (metres, or lon/lat degrees).
    path : sequence of (x, y), optional
        Evaluation path vertices or samples.
    receptors : sequence of mapping
        ``{"id", "name", "x", "y"}``; optional ``exceeds`` (bool) draws a filled marker.
    zones : GeoJSON FeatureCollection, optional
        Exposure-zone polygons; each feature's ``properties`` give ``threshold`` label
        (or ``label``/``level``), drawn with one hatch per threshold.
    geographic : bool
        Coordinates are lon/lat degrees: axes are labelled so and the aspect is corrected
        by cos(latitude) so that the map is not stretched.
    edges : sequence of sequence of (x, y)
        Right-of-way edge polylines, drawn dash-dot (the pattern of the edges in the
        lateral profile).
    """
    fig = _figure(9.0, 6.0)
    ax = fig.add_subplot()
    groups: dict[str, list] = {}
    for feature in (zones or {}).get("features", ()) or ():
        props = feature.get("properties") or {}
        label = str(props.get("label") or props.get("threshold_label") or props.get("threshold")
                    or props.get("level") or "zone")
        groups.setdefault(label, []).append(feature.get("geometry") or {})

    def group_area(item: tuple[str, list]) -> float:
        total = 0.0
        for geom in item[1]:
            for poly in _rings(geom):
                if poly and len(poly[0]) > 2:
                    ring = np.asarray(poly[0])
                    total += 0.5 * abs(float(np.dot(ring[:-1, 0], ring[1:, 1]) - np.dot(ring[1:, 0], ring[:-1, 1])))
        return total

    # Larger zones (lower thresholds) first, so smaller ones are drawn on top of them.
    for k, (label, geoms) in enumerate(sorted(groups.items(), key=group_area, reverse=True)):
        first = True
        for geom in geoms:
            for poly in _rings(geom):
                patch = PathPatch(_polygon_path(poly), facecolor=_FILL_GREYS[k % len(_FILL_GREYS)],
                                  edgecolor=_INK, hatch=_HATCHES[k % len(_HATCHES)], linewidth=0.8, alpha=0.9,
                                  label=f"zone above {_label(label)}" if first else None, zorder=1)
                ax.add_patch(patch)
                first = False

    sx = [float(s["x"]) for s in supports]
    sy = [float(s["y"]) for s in supports]
    ax.plot(sx, sy, color=_INK, linewidth=2.0, linestyle="-", label="route centre line", zorder=3)
    ax.plot(sx, sy, marker="s", markersize=7, color=_INK, markerfacecolor="white", linestyle="none",
            label="support", zorder=4)
    for s in supports:
        ax.annotate(_label(s.get("id", "")), xy=(float(s["x"]), float(s["y"])), xytext=(5, 5),
                    textcoords="offset points", fontsize=_FONT_SIZE - 1, color=_INK, zorder=6,
                    bbox=_LABEL_BOX)  # an opaque box: zone hatching never runs through the label
    for k, edge in enumerate(edges):
        e = np.asarray(edge, dtype=float)
        ax.plot(e[:, 0], e[:, 1], color=_INK, linewidth=0.9, linestyle=(0, (4, 1, 1, 1)),
                label="right-of-way edge" if k == 0 else None, zorder=2)
    if path is not None and len(path) > 1:
        p = np.asarray(path, dtype=float)
        ax.plot(p[:, 0], p[:, 1], color=_INK, linewidth=1.3, linestyle=(0, (5, 2)), label="evaluation path",
                zorder=3)
    for k, r in enumerate(receptors):
        x, y = float(r["x"]), float(r["y"])
        exceeds = bool(r.get("exceeds"))
        ax.plot([x], [y], marker="o", markersize=7, color=_INK, markerfacecolor=_INK if exceeds else "white",
                linestyle="none", zorder=5,
                label=("receptor" if k == 0 else None))
        ax.annotate(_label(r.get("name") or r.get("id", "")), xy=(x, y), xytext=(5, -10), textcoords="offset points",
                    fontsize=_FONT_SIZE - 1, color=_INK, zorder=6,
                    bbox=_LABEL_BOX)
    ax.autoscale_view()
    if geographic:
        lat = float(np.mean(sy))
        ax.set_aspect(1.0 / max(math.cos(math.radians(lat)), 1e-6), adjustable="datalim")
        ax.set_xlabel("longitude (°)", fontsize=_FONT_SIZE)
        ax.set_ylabel("latitude (°)", fontsize=_FONT_SIZE)
        ax.ticklabel_format(useOffset=False, style="plain")
    else:
        ax.set_aspect("equal", adjustable="datalim")
        ax.set_xlabel("x, easting (m)", fontsize=_FONT_SIZE)
        ax.set_ylabel("y, northing (m)", fontsize=_FONT_SIZE)
        ax.ticklabel_format(useOffset=False, style="plain")
    ax.legend(loc="upper left", bbox_to_anchor=(1.0, 1.0), fontsize=_FONT_SIZE - 1, frameon=False)
    _style_axes(ax)
    ax.tick_params(axis="x", labelrotation=30)
    return fig


def route_plan_svg(*args: Any, title: str = "Route plan view", **kwargs: Any) -> str:
    """:func:`route_plan_figure` rendered as one inline ``<svg>`` element (``title`` becomes its accessible name)."""
    return _svg_text(route_plan_figure(*args, **kwargs), "plan", title)
