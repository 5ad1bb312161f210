"""Figures for the reports, drawn with matplotlib's Agg canvas (never a window).

Five figures, each a function ``figure(document, path) -> path`` that reads a result document
(the JSON contract of DESIGN.md, optionally with the study context) and writes a PNG:

- :func:`graph_figure` — the causal graph in layers from causes to effects (topological
  generations), roles shown by node shape and fill, edges on biasing paths drawn heavy and
  dashed, declared controls tagged, with a legend;
- :func:`decomposition_figure` — a step chart from the naive to the adjusted slope, one step per
  covariate (the exact omitted-variable decomposition);
- :func:`estimates_figure` — the estimate under every adjustment set, with confidence bands;
- :func:`sensitivity_figure` — the adjusted estimate over the two strengths of a hidden
  confounder (partial R² with the treatment, with the outcome), the threshold curve, the
  robustness value and the benchmark covariates;
- :func:`plan_figure` — cost against root-mean-square error for every measurement plan, the
  efficient front, the budget and the recommended plan.

The look is our own and survives grey-scale printing: meaning is carried by shape, hatching
and line style, never by colour alone. Every user-supplied string is drawn with math parsing
off, so a ``$`` in a label stays a dollar sign. :func:`render_png` returns the bytes for
embedding; :func:`figures_for` lists the figures a document supports.

References
----------
Cinelli, C., & Hazlett, C. (2020). Making sense of sensitivity: extending omitted variable bias.
Journal of the Royal Statistical Society: Series B, 82(1), 39-67 (Sec. 5: contours of the
adjusted estimate over the two partial R² values; Sec. 6: bounds from observed covariates).
Gelbach, J. B. (2016). When do covariates matter? And which ones, and how much? Journal of Labor
Economics, 34(2), 509-543 (the decomposition drawn in :func:`decomposition_figure`).
"""

from __future__ import annotations

import io
import math
import textwrap
from collections.abc import Callable, Mapping, Sequence
from itertools import pairwise
from pathlib import Path
from typing import Any

import networkx as nx
import numpy as np
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.patches import FancyArrowPatch, Rectangle
from matplotlib.ticker import FuncFormatter, MaxNLocator

from .context import ResultView
from .files import write_atomic
from .numbers import is_number, percent, significant
from .verdict import (
    benchmark_fields,
    decomposition_parts,
    decomposition_shares,
    decomposition_target,
)

__all__ = [
    "FIGURES",
    "decomposition_figure",
    "estimates_figure",
    "figures_for",
    "graph_figure",
    "graph_layout",
    "plan_figure",
    "render_png",
    "sensitivity_figure",
]

# A small palette that prints as distinct greys; meaning never rests on colour alone.
INK = "#1d2733"
MID = "#6f7782"
LIGHT = "#d5d9de"
FAINT = "#eef0f2"
ACCENT = "#8a4b08"
DPI = 150
FONT = 8.5


def _figure(width: float, height: float) -> Figure:
    figure = Figure(figsize=(width, height), dpi=DPI, facecolor="white")
    FigureCanvasAgg(figure)
    return figure


def _png(figure: Figure) -> bytes:
    buffer = io.BytesIO()
    figure.savefig(buffer, format="png", dpi=DPI, facecolor="white",
                   metadata={"Software": "causalcheck"})
    return buffer.getvalue()


def _title(figure: Figure, title: str, subtitle: str = "") -> float:
    """Title and subtitle at the top, placed in inches; returns the height they take."""
    width, height = figure.get_size_inches()
    figure.text(0.1 / width, 1 - 0.1 / height, title, ha="left", va="top", fontsize=10.5,
                fontweight="bold", color=INK, parse_math=False)
    used = 0.38
    if subtitle:
        lines = textwrap.wrap(subtitle, width=int(width * 15.5))
        figure.text(0.1 / width, 1 - 0.36 / height, "\n".join(lines), ha="left", va="top",
                    fontsize=FONT, color=MID, parse_math=False, linespacing=1.3)
        used = 0.42 + 0.17 * len(lines)
    return used


def _plain_axes(axes) -> None:
    for side in ("top", "right"):
        axes.spines[side].set_visible(False)
    for side in ("left", "bottom"):
        axes.spines[side].set_color(MID)
        axes.spines[side].set_linewidth(0.8)
    axes.tick_params(colors=INK, labelsize=FONT - 0.5, length=3, width=0.8)


def _wrap(text: str, width: int = 18) -> str:
    return "\n".join(textwrap.wrap(text, width=width, break_long_words=True)) or text


def _mapping(value: Any) -> Mapping[str, Any]:
    return value if isinstance(value, Mapping) else {}


# --------------------------------------------------------------------------------------------
# (a) The causal graph


# role -> (box style, face colour, edge colour, text colour, bold, legend text)
_ROLE_STYLES: dict[str, tuple[str, str, str, str, bool, str]] = {
    "treatment": ("rarrow,pad=0.45", INK, INK, "white", True, "treatment"),
    "outcome": ("round,pad=0.45,rounding_size=0.6", INK, INK, "white", True, "outcome"),
    "confounder": ("square,pad=0.4", LIGHT, INK, INK, False, "confounder"),
    "mediator": ("round4,pad=0.4", "white", INK, INK, False, "mediator"),
    "collider": ("sawtooth,pad=0.4,tooth_size=0.35", "white", INK, INK, False,
                 "collider (common effect)"),
    "descendant_of_treatment": ("roundtooth,pad=0.4,tooth_size=0.3", "white", INK, INK, False,
                                "affected by the treatment"),
    "descendant_of_outcome": ("roundtooth,pad=0.4,tooth_size=0.3", FAINT, INK, INK, False,
                              "affected by the outcome"),
    "instrument": ("larrow,pad=0.4", "white", INK, INK, False,
                   "instrument (affects only the treatment)"),
    "outcome_predictor": ("round,pad=0.4", FAINT, MID, INK, False, "affects only the outcome"),
    "unrelated": ("round,pad=0.4", "white", MID, MID, False, "other"),
}
_ROLE_ORDER = ("treatment", "outcome", "confounder", "mediator", "collider",
               "descendant_of_treatment", "descendant_of_outcome", "instrument",
               "outcome_predictor", "unrelated")


def _primary_role(view: ResultView, name: str) -> str:
    roles = view.roles(name)
    if name == view.treatment:
        return "treatment"
    if name == view.outcome:
        return "outcome"
    for role in _ROLE_ORDER:
        if role in roles:
            return role
    return "unrelated"


def graph_layout(edges: Sequence[tuple[str, str]], *, sweeps: int = 6
                 ) -> dict[str, tuple[float, float]]:
    """Positions in layers from causes (left) to effects (right).

    The x coordinate is the node's topological generation (a node with no parents is in layer
    0, every other node one layer right of its latest parent's layer or more); inside a layer
    nodes are ordered by the barycentre of their neighbours in the adjacent layers, sweeping
    left-to-right and back ``sweeps`` times to reduce crossings, and spaced one unit apart,
    centred on 0.

    >>> layout = graph_layout([("z", "x"), ("z", "y"), ("x", "y")])
    >>> [layout[n][0] for n in ("z", "x", "y")]
    [0.0, 1.0, 2.0]
    """
    graph = nx.DiGraph()
    graph.add_edges_from(edges)
    layers = [sorted(layer) for layer in nx.topological_generations(graph)]
    position = {name: float(i) for layer in layers for i, name in enumerate(layer)}

    def order(layer: list[str], neighbours: Callable[[str], Any]) -> list[str]:
        def centre(node: str) -> float:
            around = [position[n] for n in neighbours(node) if n in position]
            return sum(around) / len(around) if around else position[node]
        return sorted(layer, key=lambda n: (centre(n), position[n]))

    for sweep in range(sweeps):
        forward = sweep % 2 == 0
        indices = range(1, len(layers)) if forward else range(len(layers) - 2, -1, -1)
        for index in indices:
            neighbours = graph.predecessors if forward else graph.successors
            layers[index] = order(layers[index], neighbours)
            for i, name in enumerate(layers[index]):
                position[name] = float(i) - (len(layers[index]) - 1) / 2
        if sweep == 0:
            for i, name in enumerate(layers[0]):
                position[name] = float(i) - (len(layers[0]) - 1) / 2
    return {name: (float(x), -position[name]) for x, layer in enumerate(layers)
            for name in layer}


def _edge_classes(view: ResultView, edges: Sequence[tuple[str, str]]) -> dict[tuple[str, str],
                                                                             str]:
    """Each edge's class: open biasing path, causal path, closed biasing path, or other."""
    edge_set = set(edges)
    classes = {edge: "other" for edge in edges}
    graph = nx.DiGraph()
    graph.add_edges_from(edges)
    treatment, outcome = view.treatment, view.outcome
    if treatment in graph and outcome in graph:
        for path in nx.all_simple_paths(graph, treatment, outcome, cutoff=12):
            for a, b in pairwise(path):
                classes[(a, b)] = "causal"
    closed: set[tuple[str, str]] = set()
    opened: set[tuple[str, str]] = set()
    for entry in view.get("biasing_paths") or []:
        if not isinstance(entry, Mapping):
            continue
        nodes = [str(n) for n in entry.get("path") or []]
        pairs = []
        for a, b in pairwise(nodes):
            if (a, b) in edge_set:
                pairs.append((a, b))
            elif (b, a) in edge_set:
                pairs.append((b, a))
        # open given the declared controls; with none declared, open when nothing is adjusted
        is_open = entry.get("open_given_controls")
        if is_open is None:
            is_open = entry.get("open_unadjusted", True)
        (opened if is_open else closed).update(pairs)
    for edge in closed:
        if classes[edge] == "other":
            classes[edge] = "closed"
    for edge in opened:
        classes[edge] = "open"
    return classes


_EDGE_STYLES = {
    # class -> (colour, line width, line style, legend text)
    "open": (ACCENT, 2.3, (0, (5, 2)), "on a biasing path left open"),
    "causal": (INK, 1.9, "solid", "on a causal path from treatment to outcome"),
    "closed": (MID, 1.2, (0, (1, 1.6)), "on a biasing path the controls close"),
    "other": (MID, 0.9, "solid", "other arrow"),
}


def _node_box(view: ResultView, name: str, *, controlled: bool) -> dict[str, Any]:
    role = _primary_role(view, name)
    style, face, edge, text_colour, bold, _ = _ROLE_STYLES[role]
    measured = view.measured(name)
    return {
        "boxstyle": style, "facecolor": face, "edgecolor": edge,
        "linewidth": 2.4 if controlled else 1.1,
        "linestyle": "solid" if measured else (0, (3, 2)),
        "text_colour": text_colour, "bold": bold, "italic": not measured, "role": role,
    }


def _draw_box(axes, x: float, y: float, text: str, box: Mapping[str, Any], *,
              fontsize: float = FONT, zorder: int = 3):
    return axes.text(
        x, y, text, ha="center", va="center", fontsize=fontsize, color=box["text_colour"],
        fontweight="bold" if box["bold"] else "normal",
        fontstyle="italic" if box["italic"] else "normal", parse_math=False, zorder=zorder,
        bbox={"boxstyle": box["boxstyle"], "facecolor": box["facecolor"],
              "edgecolor": box["edgecolor"], "linewidth": box["linewidth"],
              "linestyle": box["linestyle"]})


def _near_segment(point: tuple[float, float], start: tuple[float, float],
                  end: tuple[float, float]) -> float:
    px, py = point
    ax_, ay = start
    bx, by = end
    dx, dy = bx - ax_, by - ay
    length2 = dx * dx + dy * dy
    if length2 == 0:
        return math.hypot(px - ax_, py - ay)
    s = max(0.0, min(1.0, ((px - ax_) * dx + (py - ay) * dy) / length2))
    return math.hypot(px - (ax_ + s * dx), py - (ay + s * dy))


def _graph_png(document: Mapping[str, Any]) -> bytes:
    view = ResultView(document)
    edges = view.edges
    if not edges:
        raise ValueError("the document has no graph edges to draw")
    layout = graph_layout(edges)
    nodes = list(layout)
    layers = max(x for x, _ in layout.values()) + 1
    rows = max(sum(1 for x, _ in layout.values() if x == layer) for layer in range(int(layers)))
    controls = _mapping(view.get("controls")).get("used")
    if controls is None:
        controls = view.study.get("controls")
    controlled = {str(c) for c in controls or []}
    classes = _edge_classes(view, edges)

    # at most 7.8 inches wide: the HTML page shows figures at print size, never shrunk
    width = min(7.8, max(6.0, 1.6 * layers + 0.5))
    graph_height = max(2.2, 0.78 * rows + 0.9)
    roles_present = sorted({_primary_role(view, n) for n in nodes}, key=_ROLE_ORDER.index)
    extra_entries = int(any(not view.measured(n) for n in nodes)) + int(bool(controlled))
    legend_rows = math.ceil((len(roles_present) + extra_entries) / 3) + math.ceil(
        len(set(classes.values())) / 2)
    legend_height = 0.26 * legend_rows + 0.25
    subtitle = ("Causes on the left, effects on the right. Each shape is a role; heavy dashed "
                "arrows lie on biasing paths left open.")
    head = 0.42 + 0.17 * len(textwrap.wrap(subtitle, width=int(width * 15.5)))
    height = graph_height + legend_height + head
    figure = _figure(width, height)
    _title(figure, "The causal graph you declared", subtitle)
    top = 1 - head / height
    bottom = legend_height / height
    axes = figure.add_axes((0.01, bottom, 0.98, top - bottom))
    axes.set_axis_off()
    xs = [p[0] for p in layout.values()]
    ys = [p[1] for p in layout.values()]
    x_low, x_high = min(xs) - 0.62, max(xs) + 0.62
    y_low, y_high = min(ys) - 0.75, max(ys) + 0.75
    axes.set_xlim(x_low, x_high)
    axes.set_ylim(y_low, y_high)
    # inches per data unit, for bending arrows by a fixed amount on paper
    x_unit = 0.98 * width / (x_high - x_low)
    y_unit = (top - bottom) * height / (y_high - y_low)

    patches = {}
    for name in nodes:
        box = _node_box(view, name, controlled=name in controlled)
        label = _wrap(view.label(name), 15 if layers > 4 else 17)
        if not view.measured(name):
            label += "\n(not measured)"
        text = _draw_box(axes, *layout[name], label, box)
        patches[name] = text
    figure.canvas.draw()  # positions the boxes so the arrows can be clipped at their edges

    def clearance(points: list[tuple[float, float]], skip: tuple[str, str]) -> float:
        return min((math.hypot((px - layout[n][0]) * x_unit, (py - layout[n][1]) * y_unit)
                    for n in nodes if n not in skip for px, py in points), default=math.inf)

    for (a, b), kind in sorted(classes.items(), key=lambda item: list(_EDGE_STYLES)
                               .index(item[1]), reverse=True):
        colour, width_, style, _ = _EDGE_STYLES[kind]
        start, end = layout[a], layout[b]
        blocked = any(_near_segment(layout[n], start, end) < 0.32 for n in nodes
                      if n not in (a, b))
        bend = 0.0
        if blocked:
            # arc3 puts the control point at the chord's midpoint plus rad·(dy, −dx) in display
            # units; the curve strays rad·length/2 from the chord. Aim for 0.4 inch, on the side
            # that keeps farther from the other boxes.
            dx, dy = (end[0] - start[0]) * x_unit, (end[1] - start[1]) * y_unit
            length = math.hypot(dx, dy)
            magnitude = min(0.45, 0.8 / length) if length else 0.0
            best = -math.inf
            for sign in (1.0, -1.0):
                rad = sign * magnitude
                cx = (start[0] + end[0]) / 2 + rad * dy / x_unit
                cy = (start[1] + end[1]) / 2 - rad * dx / y_unit
                curve = [((1 - t) ** 2 * start[0] + 2 * t * (1 - t) * cx + t**2 * end[0],
                          (1 - t) ** 2 * start[1] + 2 * t * (1 - t) * cy + t**2 * end[1])
                         for t in (0.25, 0.5, 0.75)]
                room = clearance(curve, (a, b))
                if room > best:
                    best, bend = room, rad
        arrow = FancyArrowPatch(
            start, end, patchA=patches[a].get_bbox_patch(), patchB=patches[b].get_bbox_patch(),
            shrinkA=2.5, shrinkB=3.5, arrowstyle="-|>,head_length=5,head_width=2.6",
            mutation_scale=1.0, color=colour, linewidth=width_, linestyle=style,
            connectionstyle=f"arc3,rad={bend}", zorder=2, clip_on=False)
        axes.add_patch(arrow)

    # legend, our own: sample boxes and line samples under the graph
    legend = figure.add_axes((0.01, 0.0, 0.98, bottom))
    legend.set_axis_off()
    legend.set_xlim(0, 3)
    legend.set_ylim(-0.6, legend_rows - 0.1)
    row = legend_rows - 0.6
    column = 0
    samples = [(role, _ROLE_STYLES[role]) for role in roles_present]
    entries: list[tuple[str, dict[str, Any], str]] = []
    for role, (style, face, edge, text_colour, bold, words) in samples:
        entries.append((role, {"boxstyle": style, "facecolor": face, "edgecolor": edge,
                               "linewidth": 1.1, "linestyle": "solid",
                               "text_colour": text_colour, "bold": bold, "italic": False},
                        words))
    if any(not view.measured(n) for n in nodes):
        entries.append(("unmeasured", {"boxstyle": "square,pad=0.4", "facecolor": "white",
                                       "edgecolor": INK, "linewidth": 1.1,
                                       "linestyle": (0, (3, 2)), "text_colour": INK,
                                       "bold": False, "italic": True}, "not measured (dashed)"))
    if controlled:
        entries.append(("controlled", {"boxstyle": "square,pad=0.4", "facecolor": "white",
                                       "edgecolor": INK, "linewidth": 2.4,
                                       "linestyle": "solid", "text_colour": INK,
                                       "bold": False, "italic": False},
                        "in the declared controls (heavy frame)"))
    for _, box, words in entries:
        x0 = column + 0.04
        _draw_box(legend, x0 + 0.05, row, "    ", box, fontsize=6.0)
        legend.text(x0 + 0.15, row, words, ha="left", va="center", fontsize=FONT - 1,
                    color=INK, parse_math=False)
        column += 1
        if column == 3:
            column = 0
            row -= 1
    if column:
        row -= 1
    column = 0
    for kind, (colour, width_, style, words) in _EDGE_STYLES.items():
        if kind not in classes.values():
            continue
        x0 = column * 1.5 + 0.02
        legend.add_patch(FancyArrowPatch((x0, row), (x0 + 0.14, row),
                                         arrowstyle="-|>,head_length=5,head_width=2.6",
                                         mutation_scale=1.0, color=colour, linewidth=width_,
                                         linestyle=style))
        legend.text(x0 + 0.17, row, words, ha="left", va="center", fontsize=FONT - 1,
                    color=INK, parse_math=False)
        column += 1
        if column == 2:
            column = 0
            row -= 1
    return _png(figure)


# --------------------------------------------------------------------------------------------
# (b) The decomposition of the naive - adjusted gap


def _decomposition_png(document: Mapping[str, Any]) -> bytes:
    view = ResultView(document)
    naive, adjusted, _ = decomposition_parts(document)
    target = decomposition_target(document)
    rows = decomposition_shares(document)
    if not (is_number(naive) and is_number(adjusted)) or not rows:
        raise ValueError("the document has no decomposition to draw")
    naive, adjusted = float(naive), float(adjusted)
    gap = naive - adjusted
    shown, rest = rows[:8], rows[8:]
    steps = [(view.label(str(r.get("variable"))), float(r["contribution"]), r["share"])
             for r in shown]
    if rest:
        total = sum(float(r["contribution"]) for r in rest)
        steps.append((f"{len(rest)} others", total, total / gap if gap else None))
    unit = view.unit(view.outcome)
    count_rows = len(steps) + 2
    width = 7.2
    subtitle = ("Each hatched step is one covariate's part of the gap between the naive and the "
                "adjusted slope (the exact omitted-variable decomposition).")
    head = 0.42 + 0.17 * len(textwrap.wrap(subtitle, width=int(width * 15.5)))
    body = 0.42 * count_rows
    height = head + body + 0.75
    figure = _figure(width, height)
    _title(figure, "From the naive to the adjusted slope", subtitle)
    axes = figure.add_axes((0.30, 0.6 / height, 0.66, body / height))
    _plain_axes(axes)
    axes.spines["left"].set_visible(False)
    axes.tick_params(axis="y", length=0)
    bar = 0.58
    running = naive
    values = [0.0, naive, adjusted]
    labels = ["Naive slope (no controls)"]
    y = count_rows - 1
    axes.add_patch(Rectangle((0, y - bar / 2), naive, bar, facecolor=MID, edgecolor=INK,
                             linewidth=0.8))
    totals = [(naive, y)]
    step_notes = []
    for label, contribution, share in steps:
        y -= 1
        # each step removes its contribution from the running slope: naive − Σ = adjusted
        new = running - contribution
        left, right = sorted((running, new))
        axes.add_patch(Rectangle((left, y - bar / 2), right - left, bar, facecolor="white",
                                 edgecolor=INK, linewidth=0.8,
                                 hatch="////" if contribution > 0 else "\\\\\\\\"))
        axes.plot([running, running], [y + 1 - bar / 2, y + bar / 2], color=MID,
                  linewidth=0.8, linestyle=(0, (1, 1.5)))
        share_text = f" ({percent(share)} of the gap)" if share is not None else ""
        step_notes.append((left, right, y,
                           f"{significant(-contribution, sign=True)}{share_text}"))
        labels.append(_wrap(label, 32))
        running = new
        values.append(running)
    y -= 1
    axes.plot([running, running], [y + 1 - bar / 2, y + bar / 2], color=MID, linewidth=0.8,
              linestyle=(0, (1, 1.5)))
    axes.add_patch(Rectangle((0, y - bar / 2), adjusted, bar, facecolor=INK, edgecolor=INK,
                             linewidth=0.8))
    totals.append((adjusted, y))
    labels.append("Adjusted slope" if target == "adjusted" else "With the declared controls")
    low, high = min(values), max(values)
    span = (high - low) or 1.0
    axes.set_xlim(low - 0.3 * span, high + 0.3 * span)
    axes.set_ylim(-0.6, count_rows - 0.4)
    axes.axvline(0, color=INK, linewidth=0.9)
    if view.threshold != 0:
        axes.axvline(view.threshold, color=INK, linewidth=1.0, linestyle=(0, (4, 2)))
    pad = 0.012 * span
    for value, y_pos in totals:
        outward = value < 0
        axes.text(value - pad if outward else value + pad, y_pos, significant(value),
                  va="center", ha="right" if outward else "left", fontsize=FONT - 0.5,
                  color=INK, fontweight="bold", parse_math=False)
    for left, right, y_pos, text in step_notes:
        # write the step's size on the side with more room (towards zero for a negative slope)
        toward_right = (high + 0.3 * span - right) >= (left - (low - 0.3 * span))
        axes.text(right + pad if toward_right else left - pad, y_pos, text, va="center",
                  ha="left" if toward_right else "right", fontsize=FONT - 0.5, color=INK,
                  parse_math=False)
    axes.set_yticks(range(count_rows - 1, -1, -1))
    axes.set_yticklabels(labels, fontsize=FONT)
    axes.set_xlabel(f"Slope of {view.label(view.outcome or 'outcome')}"
                    + (f" ({unit})" if unit else ""), fontsize=FONT, color=INK)
    return _png(figure)


# --------------------------------------------------------------------------------------------
# (c) Estimates across adjustment sets


def _interval(entry: Mapping[str, Any], alpha: float) -> tuple[float, float] | None:
    low, high = entry.get("ci_low"), entry.get("ci_high")
    if is_number(low) and is_number(high):
        return float(low), float(high)
    se, estimate = entry.get("std_error"), entry.get("estimate")
    if is_number(se) and is_number(estimate):
        from scipy import stats

        dof = entry.get("dof")
        critical = stats.t.ppf(1 - alpha / 2, dof) if is_number(dof) and dof > 0 \
            else stats.norm.ppf(1 - alpha / 2)
        # estimate ± critical · se
        return float(estimate - critical * se), float(estimate + critical * se)
    return None


def _estimates_png(document: Mapping[str, Any]) -> bytes:
    view = ResultView(document)
    estimates = _mapping(document.get("estimates"))
    naive = _mapping(estimates.get("naive"))
    adjusted = _mapping(estimates.get("adjusted"))
    headline = sorted(str(n) for n in adjusted.get("set") or []) if adjusted else None
    rows: list[tuple[str, float, tuple[float, float] | None, str]] = []
    if is_number(naive.get("estimate")):
        rows.append(("No controls (naive)", float(naive["estimate"]),
                     _interval(naive, view.alpha), "naive"))
    seen = set()
    for entry in estimates.get("by_set") or []:
        if not isinstance(entry, Mapping) or not is_number(entry.get("estimate")):
            continue
        names = sorted(str(n) for n in entry.get("set") or [])
        key = tuple(names)
        if key in seen:
            continue
        seen.add(key)
        label = ", ".join(view.labels(names)) or "no controls"
        status = "valid" if entry.get("valid", True) else "invalid"
        reason = str(entry.get("reason") or "")
        if "declared" in reason:
            label = "Declared: " + label
        if names == headline:
            status = "headline" if entry.get("valid", True) is not False else "headline-invalid"
        rows.append((label, float(entry["estimate"]), _interval(entry, view.alpha), status))
    if headline is not None and not any(r[3].startswith("headline") for r in rows) \
            and is_number(adjusted.get("estimate")):
        rows.append((", ".join(view.labels(headline)) or "no controls",
                     float(adjusted["estimate"]), _interval(adjusted, view.alpha), "headline"))
    if not rows:
        raise ValueError("the document has no estimates to draw")
    rows = rows[:30]
    labels = []
    for label, _, _, status in rows:
        text = _wrap(label, 34)
        notes = []
        if status.startswith("headline"):
            notes.append("headline")
        if status in ("invalid", "headline-invalid"):
            notes.append("not valid")
        if notes:
            text += "\n(" + ", ".join(notes) + ")"
        labels.append(text)
    lines_per_row = max(label.count("\n") + 1 for label in labels)
    width = 7.2
    subtitle = (f"Bands are {view.confidence} confidence intervals, the bar is the estimate; "
                "hatched bands come from sets that are not valid for this graph.")
    head = 0.42 + 0.17 * len(textwrap.wrap(subtitle, width=int(width * 15.5)))
    step = 0.3 + 0.14 * lines_per_row
    body = step * len(rows)
    height = head + body + 0.75
    figure = _figure(width, height)
    _title(figure, "The estimate under each adjustment set", subtitle)
    longest = max(len(line) for label in labels for line in label.split("\n"))
    left = min(0.48, (0.065 * longest + 0.25) / width)
    axes = figure.add_axes((left, 0.6 / height, 0.97 - left, body / height))
    _plain_axes(axes)
    axes.spines["left"].set_visible(False)
    axes.tick_params(axis="y", length=0)
    values = [r[1] for r in rows] + [view.threshold]
    for r in rows:
        if r[2] is not None:
            values += list(r[2])
    for index, (label, estimate, ci, status) in enumerate(rows):
        y = len(rows) - 1 - index
        band = 0.34 if status.startswith("headline") else 0.24
        if ci is not None:
            if status in ("invalid", "headline-invalid"):
                axes.add_patch(Rectangle((ci[0], y - band / 2), ci[1] - ci[0], band,
                                         facecolor="white", edgecolor=MID, linewidth=0.8,
                                         hatch="////"))
            else:
                face = MID if status == "headline" else LIGHT
                axes.add_patch(Rectangle((ci[0], y - band / 2), ci[1] - ci[0], band,
                                         facecolor=face, edgecolor=INK if status == "headline"
                                         else MID, linewidth=0.8))
        axes.plot([estimate, estimate], [y - 0.3, y + 0.3], color=INK,
                  linewidth=2.6 if status.startswith("headline") else 1.8,
                  solid_capstyle="butt")
        axes.text(ci[1] if ci is not None else estimate, y, "  " + significant(estimate),
                  va="center", ha="left", fontsize=FONT - 1, color=INK, parse_math=False)
    low, high = min(values), max(values)
    span = (high - low) or 1.0
    axes.set_xlim(low - 0.08 * span, high + 0.2 * span)
    axes.set_ylim(-0.7, len(rows) - 0.3)
    axes.axvline(view.threshold, color=INK, linewidth=1.0, linestyle=(0, (4, 2)))
    axes.text(view.threshold, len(rows) - 0.35, f" threshold {significant(view.threshold)}",
              fontsize=FONT - 1, color=INK, va="bottom", ha="left", parse_math=False)
    axes.set_yticks([len(rows) - 1 - i for i in range(len(rows))])
    axes.set_yticklabels(labels, fontsize=FONT - 0.5)
    unit = view.unit(view.outcome)
    axes.set_xlabel(f"Slope of {view.label(view.outcome or 'outcome')}"
                    + (f" ({unit})" if unit else ""), fontsize=FONT, color=INK)
    return _png(figure)


# --------------------------------------------------------------------------------------------
# (d) Sensitivity contours


def _sensitivity_inputs(document: Mapping[str, Any]) -> tuple[float, float, float,
                                                              Mapping[str, Any]]:
    if isinstance(document.get("estimates"), Mapping):
        # the sensitivity block names the estimate its robustness values refer to; older
        # documents leave it to the adjusted estimate
        sensitivity = _mapping(document.get("sensitivity"))
        adjusted = _mapping(document["estimates"].get("adjusted"))
        source = sensitivity if is_number(sensitivity.get("estimate")) else adjusted
        estimate, se = source.get("estimate"), source.get("std_error")
        dof = source.get("dof", sensitivity.get("dof"))
    else:
        sensitivity = document
        estimate, se, dof = document.get("estimate"), document.get("std_error"), \
            document.get("dof")
    if not (is_number(estimate) and is_number(se) and is_number(dof)) or se <= 0 or dof <= 1:
        raise ValueError("the document has no estimate, standard error and dof to draw")
    return float(estimate), float(se), float(dof), sensitivity


def _sensitivity_png(document: Mapping[str, Any]) -> bytes:
    from ..sensitivity import bounds_grid

    view = ResultView(document)
    estimate, se, dof, sensitivity = _sensitivity_inputs(document)
    threshold = view.threshold
    rv = sensitivity.get("robustness_value")
    marks = []
    for raw in sensitivity.get("benchmarks") or []:
        if isinstance(raw, Mapping):
            fields = benchmark_fields(raw)
            if fields["variable"] and fields["r2_treatment"] is not None \
                    and fields["r2_outcome"] is not None:
                marks.append(fields)
    reach = [0.05]
    if is_number(rv):
        reach.append(1.7 * rv)
    reach += [1.25 * m["r2_treatment"] for m in marks] + [1.25 * m["r2_outcome"] for m in marks]
    x_max = min(0.98, max(reach))
    y_max = min(1.0, max(reach))
    x = np.linspace(0, x_max, 161)
    y = np.linspace(0, y_max, 161)
    grid = bounds_grid(estimate, se, dof, x, y, threshold=threshold, alpha=view.alpha)
    values = grid.bounds.adjusted_estimate.T      # rows: r2yz, columns: r2dz

    width, height = 6.6, 5.8
    figure = _figure(width, height)
    head = _title(figure, "How strong would a hidden confounder have to be?",
                  "Shading and labelled lines: the estimate after adjusting for a confounder of "
                  "that strength. Cross-hatched: the claim is overturned.")
    axes = figure.add_axes((0.8 / width, 0.55 / height, 1 - 1.0 / width,
                            1 - (head + 0.2 + 0.55) / height))
    _plain_axes(axes)
    side = 1.0 if estimate >= threshold else -1.0
    low_, high_ = min(estimate, threshold), max(estimate, threshold)
    nice = [float(v) for v in MaxNLocator(6).tick_values(low_, high_)
            if low_ < v < high_ and abs(v - threshold) > 1e-12 * (1 + abs(threshold))]
    # grey bands between labelled levels, lighter near the estimate, darker near the threshold
    band_levels = sorted({low_, high_, *nice})
    if values.max() > band_levels[-1] and side > 0:
        band_levels[-1] = float(values.max())
    shades = np.linspace(0.97, 0.76, len(band_levels) - 1)
    greys = [str(round(float(v), 3)) for v in (shades[::-1] if side > 0 else shades)]
    axes.contourf(x, y, values, levels=band_levels, colors=greys, extend="neither")
    beyond = [values.min() - 1, threshold] if side > 0 else [threshold, values.max() + 1]
    hatched = axes.contourf(x, y, values, levels=beyond, colors="none", hatches=["xx"])
    for collection in getattr(hatched, "collections", [hatched]):
        collection.set_edgecolor(MID)
        collection.set_linewidth(0)
    if nice:
        lines = axes.contour(x, y, values, levels=nice, colors=MID, linewidths=0.7,
                             linestyles="solid")
        axes.clabel(lines, fmt=lambda v: significant(v), fontsize=FONT - 1.5, inline=True)
    # where the confidence interval first reaches the threshold
    ci_edge = (grid.bounds.ci_low if side > 0 else grid.bounds.ci_high).T
    if np.nanmin(ci_edge) < threshold < np.nanmax(ci_edge):
        axes.contour(x, y, ci_edge, levels=[threshold], colors=INK, linewidths=1.3,
                     linestyles=[(0, (6, 2, 1, 2))])
    axes.contour(x, y, values, levels=[threshold], colors=INK, linewidths=2.4)
    # the threshold curve's own label, placed where it crosses the diagonal
    if is_number(rv) and 0 < rv < min(x_max, y_max):
        axes.plot([0, rv], [0, rv], color=INK, linewidth=0.8, linestyle=(0, (1, 2)))
        axes.plot([rv], [rv], marker="o", markersize=7, markerfacecolor="white",
                  markeredgecolor=INK, markeredgewidth=1.6, linestyle="none", zorder=5)
        axes.annotate(f"robustness value {percent(rv)}\n(estimate reaches "
                      f"{significant(threshold)})", (rv, rv), xytext=(9, -9),
                      textcoords="offset points", fontsize=FONT - 0.5, color=INK,
                      ha="left", va="top", annotation_clip=False,
                      bbox={"boxstyle": "square,pad=0.2", "facecolor": "white",
                            "edgecolor": "none"})
    axes.plot([0], [0], marker="o", markersize=6, color=INK, linestyle="none", zorder=5,
              clip_on=False)
    axes.annotate(f"as estimated: {significant(estimate)}", (0, 0), xytext=(6, 6),
                  textcoords="offset points", fontsize=FONT - 0.5, color=INK)
    by_name: dict[str, list[dict[str, Any]]] = {}
    for mark in marks:
        by_name.setdefault(mark["variable"], []).append(mark)
    placed: list[tuple[float, float]] = []   # label anchors in axes fractions
    for name, group in by_name.items():
        group.sort(key=lambda m: m["multiplier"])
        xs_ = [m["r2_treatment"] for m in group]
        ys_ = [m["r2_outcome"] for m in group]
        axes.plot(xs_, ys_, color=INK, linewidth=0.7, linestyle="solid", zorder=4)
        axes.plot(xs_, ys_, marker="s", markersize=5.5, markerfacecolor="white",
                  markeredgecolor=INK, markeredgewidth=1.3, linestyle="none", zorder=6)
        # one label a benchmark, at its strongest multiple, listing the multiples in order
        # along the line from the origin; moved down while it would sit on an earlier one
        times = ", ".join(f"{significant(m['multiplier'])}×" for m in group)
        last = group[-1]
        fx = min(last["r2_treatment"] / x_max, 1.0)
        fy = min(last["r2_outcome"] / y_max, 1.0)
        shift = 0.0
        while any(abs(fy - shift - py) < 0.045 and abs(fx - px) < 0.3 for px, py in placed):
            shift += 0.045
        placed.append((fx, fy - shift))
        axes.annotate(f"{view.label(name)} ({times})", (last["r2_treatment"], last["r2_outcome"]),
                      xytext=(fx + 0.015, fy - shift), textcoords="axes fraction",
                      fontsize=FONT - 1.5, color=INK, ha="left", va="center",
                      annotation_clip=True, parse_math=False,
                      bbox={"boxstyle": "square,pad=0.15", "facecolor": "white",
                            "edgecolor": "none", "alpha": 0.85})
    axes.set_xlim(0, x_max)
    axes.set_ylim(0, y_max)
    axes.xaxis.set_major_formatter(FuncFormatter(lambda v, _: percent(v) if v else "0"))
    axes.yaxis.set_major_formatter(FuncFormatter(lambda v, _: percent(v) if v else "0"))
    axes.xaxis.set_major_locator(MaxNLocator(6))
    axes.yaxis.set_major_locator(MaxNLocator(6))
    axes.set_xlabel("Partial R² of the hidden confounder with the treatment",
                    fontsize=FONT, color=INK)
    axes.set_ylabel("Partial R² of the hidden confounder with the outcome",
                    fontsize=FONT, color=INK)
    handles = [Line2D([], [], color=INK, linewidth=2.4,
                      label=f"estimate reaches {significant(threshold)}"),
               Line2D([], [], color=INK, linewidth=1.3, linestyle=(0, (6, 2, 1, 2)),
                      label=f"{view.confidence} interval reaches {significant(threshold)}")]
    if marks:
        handles.append(Line2D([], [], color=INK, marker="s", markerfacecolor="white",
                              linestyle="none", label="k × as strong as a measured covariate"))
    axes.legend(handles=handles, loc="upper right", fontsize=FONT - 1, frameon=True,
                framealpha=1, edgecolor=LIGHT)
    return _png(figure)


# --------------------------------------------------------------------------------------------
# (e) The plan's cost-error front


def _front(options: Sequence[Mapping[str, Any]]) -> list[Mapping[str, Any]]:
    """Options no other option beats on both cost and error (the efficient front)."""
    ordered = sorted(options, key=lambda o: (o["cost"], o["rmse"]))
    front: list[Mapping[str, Any]] = []
    best = math.inf
    for option in ordered:
        if option["rmse"] < best - 1e-15:
            front.append(option)
            best = option["rmse"]
    return front


def _plan_png(document: Mapping[str, Any]) -> bytes:
    view = ResultView(document)
    options = [o for o in document.get("options") or [] if isinstance(o, Mapping)
               and is_number(o.get("cost")) and is_number(o.get("rmse"))]
    if not options:
        raise ValueError("the document has no plan options to draw")
    recommended = _mapping(document.get("recommended"))
    budget = document.get("budget")
    front = [o for o in options if o.get("pareto")] or _front(options)
    front = sorted(front, key=lambda o: o["cost"])
    width, height = 7.2, 4.9
    figure = _figure(width, height)
    head = _title(figure, "What each measurement plan costs and how far off it would be",
                  "Lower is better. The steps join the plans that no other plan beats on both "
                  "cost and error.")
    axes = figure.add_axes((0.8 / width, 0.55 / height, 1 - 1.0 / width,
                            1 - (head + 0.2 + 0.55) / height))
    _plain_axes(axes)
    costs = [o["cost"] for o in options]
    errors = [o["rmse"] for o in options]
    top_cost = max(costs + ([budget] if is_number(budget) else []))
    x_max = top_cost * 1.08 + 1e-9 if top_cost > 0 else 1.0
    if is_number(budget) and budget < x_max:
        axes.add_patch(Rectangle((budget, 0), x_max - budget, max(errors) * 10,
                                 facecolor="white", edgecolor=LIGHT, hatch="..", linewidth=0,
                                 zorder=0))
        axes.axvline(budget, color=INK, linewidth=1.0, linestyle=(0, (4, 2)), zorder=1)
        axes.text(budget, max(errors) * 1.12, f" budget {significant(budget)}\n over budget",
                  fontsize=FONT - 1, color=INK, ha="left", va="top",
                  bbox={"boxstyle": "square,pad=0.15", "facecolor": "white",
                        "edgecolor": "none"})
    biased = [o for o in options if not o.get("valid")]
    unbiased = [o for o in options if o.get("valid")]
    axes.plot([o["cost"] for o in biased], [o["rmse"] for o in biased], marker="o",
              markersize=4.5, markerfacecolor="white", markeredgecolor=MID, linestyle="none",
              zorder=3, label="plan with bias left")
    axes.plot([o["cost"] for o in unbiased], [o["rmse"] for o in unbiased], marker="o",
              markersize=4.5, color=INK, linestyle="none", zorder=3,
              label="plan without bias (valid set)")
    axes.step([o["cost"] for o in front], [o["rmse"] for o in front], where="post",
              color=INK, linewidth=1.4, zorder=2, label="efficient front")
    if recommended and is_number(recommended.get("cost")) \
            and is_number(recommended.get("rmse")):
        axes.plot([recommended["cost"]], [recommended["rmse"]], marker="D", markersize=10,
                  markerfacecolor="none", markeredgecolor=INK, markeredgewidth=1.8,
                  linestyle="none", zorder=4, label="recommended")
    # label only the plans a reader asks about: nothing more, the recommended one, the best
    # plan without bias; the table lists the rest
    labelled: list[tuple[Mapping[str, Any], str, tuple[float, float]]] = []
    baseline = _mapping(document.get("baseline")) or next(
        (o for o in options if not o.get("measure")), {})
    best_valid = _mapping(document.get("best_valid"))
    if recommended:
        labelled.append((recommended, "recommended", (0, 14)))
    if baseline and baseline.get("measure") != recommended.get("measure"):
        labelled.append((baseline, "", (6, 6)))
    if best_valid and best_valid.get("measure") != recommended.get("measure"):
        labelled.append((best_valid, "without bias", (0, -16)))
    for option, prefix, offset in labelled:
        if not (is_number(option.get("cost")) and is_number(option.get("rmse"))):
            continue
        names = view.labels(option.get("measure"))
        text = "measure nothing more" if not names else "measure " + " + ".join(names)
        if prefix:
            text = f"{prefix}: {text}"
        text = textwrap.fill(textwrap.shorten(text, width=70, placeholder="…"), 34)
        position = option["cost"] / x_max
        ha = "left" if position < 0.3 else ("right" if position > 0.7 else "center")
        axes.annotate(text, (option["cost"], option["rmse"]), xytext=offset,
                      textcoords="offset points", fontsize=FONT - 1.5, color=INK, ha=ha,
                      va="bottom" if offset[1] >= 0 else "top", parse_math=False, zorder=6,
                      bbox={"boxstyle": "square,pad=0.2", "facecolor": "white",
                            "edgecolor": "none", "alpha": 0.9})
    axes.set_xlim(-0.03 * x_max, x_max)
    axes.set_ylim(0, max(errors) * 1.18)
    axes.set_xlabel("Cost of the extra measurements", fontsize=FONT, color=INK)
    axes.set_ylabel("Root-mean-square error of the estimate", fontsize=FONT, color=INK)
    axes.legend(loc="lower left", fontsize=FONT - 1, frameon=True, framealpha=1,
                edgecolor=LIGHT)
    return _png(figure)


# --------------------------------------------------------------------------------------------
# The public functions


def _writer(render: Callable[[Mapping[str, Any]], bytes], name: str, doc: str):
    def figure(document: Mapping[str, Any], path: str | Path) -> Path:
        return write_atomic(Path(path), render(document))

    figure.__name__ = name
    figure.__qualname__ = name
    figure.__doc__ = doc
    return figure


graph_figure = _writer(_graph_png, "graph_figure", """Draw the causal graph to ``path`` (PNG).

Needs the graph's edges (``edges`` in the document or its study context); roles from
``variables``, biasing paths from ``biasing_paths``, declared controls from ``controls``.
Returns the path.
""")
decomposition_figure = _writer(_decomposition_png, "decomposition_figure",
                               """Draw the naive-to-adjusted step chart to ``path`` (PNG).

Needs ``estimates.naive``, ``estimates.adjusted`` and ``decomposition``. Returns the path.
""")
estimates_figure = _writer(_estimates_png, "estimates_figure",
                           """Draw the estimates across adjustment sets to ``path`` (PNG).

Needs ``estimates`` (``naive``, ``adjusted``, ``by_set``). Intervals are the document's
``ci_low``/``ci_high`` or, when absent, estimate ± t·SE. Returns the path.
""")
sensitivity_figure = _writer(_sensitivity_png, "sensitivity_figure",
                             """Draw the sensitivity contours to ``path`` (PNG).

Needs an estimate, its standard error and residual dof (``estimates.adjusted`` for an audit,
the top level for a vet). The adjusted estimate at each point comes from
:func:`causalcheck.sensitivity.bounds_grid` (Cinelli & Hazlett 2020, Sec. 5). Returns the path.
""")
plan_figure = _writer(_plan_png, "plan_figure", """Draw the plans' cost against error to
``path`` (PNG).

Needs ``options`` with ``cost`` and ``rmse``. Returns the path.
""")

# name -> (file name, renderer)
FIGURES: dict[str, tuple[str, Callable[[Mapping[str, Any]], bytes]]] = {
    "graph": ("graph.png", _graph_png),
    "estimates": ("estimates.png", _estimates_png),
    "decomposition": ("decomposition.png", _decomposition_png),
    "sensitivity": ("sensitivity.png", _sensitivity_png),
    "plan": ("plan.png", _plan_png),
}


def figures_for(document: Mapping[str, Any]) -> list[str]:
    """The names of the figures a document has the numbers for, in report order."""
    view = ResultView(document)
    names = []
    if view.edges:
        names.append("graph")
    estimates = _mapping(document.get("estimates"))
    if estimates and (estimates.get("by_set") or estimates.get("adjusted")):
        names.append("estimates")
    if decomposition_shares(document):
        names.append("decomposition")
    try:
        _sensitivity_inputs(document)
        if view.kind in ("audit", "vet"):
            names.append("sensitivity")
    except ValueError:
        pass
    if document.get("options"):
        names.append("plan")
    return names


def render_png(name: str, document: Mapping[str, Any]) -> bytes:
    """The PNG bytes of figure ``name`` (a key of :data:`FIGURES`) for ``document``."""
    return FIGURES[name][1](document)
