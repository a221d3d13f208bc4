"""The report's charts: matplotlib figures saved as SVG, made ready to sit inside one HTML page.

Every chart is drawn by matplotlib (the object-oriented API: a ``Figure`` per chart and its
own SVG canvas, no pyplot state, so charts can be drawn on several threads at once) and saved
with the SVG backend. Output is deterministic: a fixed ``svg.hashsalt`` makes the ids the same
on every run, and the metadata carry no date. Text stays text (``svg.fonttype: none``): small,
selectable, and drawn in the reader's own sans-serif font; matplotlib still uses its bundled
DejaVu metrics for the layout. Names are never read as math text (``text.parse_math`` off), so
a ``$`` in a variable's name is just a character.

Colours are the Okabe-Ito palette (Okabe & Ito 2008, "Color Universal Design"), safe for the
common colour-vision deficiencies, and every distinction that colour makes is also made by
marker shape or line style.
"""

from __future__ import annotations

import io
import math
import re
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any, cast

import matplotlib
from matplotlib.axes import Axes
from matplotlib.backends.backend_svg import FigureCanvasSVG
from matplotlib.figure import Figure
from matplotlib.ticker import FuncFormatter, LogLocator, MaxNLocator, NullFormatter

__all__ = [
    "BLUE",
    "VERMILLION",
    "Chart",
    "conditioning_chart",
    "inflation_charts",
    "removal_chart",
    "ridge_chart",
    "terms_chart",
]

# Okabe-Ito colours, and black.
BLUE = "#0072B2"
VERMILLION = "#D55E00"
ORANGE = "#E69F00"
SKY = "#56B4E9"
GREEN = "#009E73"
PURPLE = "#CC79A7"
BLACK = "#000000"
GREY = "#6F6F6F"

#: Variables per inflation chart: a taller one would not fit a printed page (A4 or Letter).
PER_CHART = 30
#: Drops of a removal path named on its axis; a longer path is numbered.
NAMED_STEPS = 12
#: Characters of a name shown on an axis (the tables give names in full).
LABEL_CHARS = 28
WIDTH_IN = 6.6  # 168 mm: fits the printable width of A4 and of Letter

_STYLE: dict[str, Any] = {
    "svg.fonttype": "none",
    "svg.hashsalt": "knotwork-report",
    "text.parse_math": False,
    "font.family": "sans-serif",
    "font.sans-serif": ["DejaVu Sans"],
    "font.size": 8.5,
    "axes.titlesize": 9.5,
    "axes.labelsize": 8.5,
    "axes.edgecolor": GREY,
    "axes.linewidth": 0.6,
    "axes.spines.top": False,
    "axes.spines.right": False,
    "xtick.color": GREY,
    "ytick.color": GREY,
    "xtick.labelcolor": BLACK,
    "ytick.labelcolor": BLACK,
    "legend.frameon": False,
    "legend.fontsize": 7.5,
    "path.simplify": True,
}
# matplotlib's stubs type each key; the style is a plain mapping of them.
cast(Any, matplotlib.rcParams).update(_STYLE)

_METADATA: dict[str, Any] = {"Date": None, "Creator": None, "Format": None, "Type": None}


@dataclass(frozen=True, slots=True)
class Chart:
    """One chart, ready for the page.

    Attributes
    ----------
    key
        A short id, unique within the page (prefixes every id inside the SVG).
    title
        The chart's title, also its accessible name.
    description
        A text alternative: what the chart shows, in words and numbers.
    svg
        The ``<svg>`` element.
    """

    key: str
    title: str
    description: str
    svg: str


def _short(name: str) -> str:
    return name if len(name) <= LABEL_CHARS else name[: LABEL_CHARS - 1] + "…"


def _svg(figure: Figure, key: str, title: str, description: str) -> Chart:
    """Save ``figure`` as inline SVG with ids unique in the page and a text alternative."""
    FigureCanvasSVG(figure)
    buffer = io.BytesIO()
    figure.savefig(buffer, format="svg", metadata=_METADATA)
    text = buffer.getvalue().decode("utf-8")
    text = text[text.index("<svg") :]
    # Inline SVG in HTML needs no namespace declarations; SVG 2 reads plain href.
    text = re.sub(r'\s+xmlns(:xlink)?="[^"]*"', "", text)
    text = text.replace("xlink:href=", "href=")
    # Ids must be unique in the page: prefix every id and every reference to one.
    text = re.sub(r'\bid="([^"]+)"', rf'id="{key}-\1"', text)
    text = re.sub(r'href="#([^"]+)"', rf'href="#{key}-\1"', text)
    text = re.sub(r"url\(#([^)]+)\)", rf"url(#{key}-\1)", text)
    # Width from the page, height from the view box (aspect kept).
    text = re.sub(r'<svg\s+width="[^"]*"\s+height="[^"]*"', "<svg", text, count=1)
    labels = f'role="img" aria-labelledby="{key}-title {key}-desc" class="chart"'
    accessible = (
        f"<svg {labels}"
        + text[len("<svg") : text.index(">") + 1]
        + f'<title id="{key}-title">{_escape(title)}</title>'
        + f'<desc id="{key}-desc">{_escape(description)}</desc>'
        + text[text.index(">") + 1 :]
    )
    return Chart(key=key, title=title, description=description, svg=accessible.strip())


def _escape(text: str) -> str:
    return text.replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;")


def _fmt(value: float | None) -> str:
    if value is None or not math.isfinite(value):
        return "infinite"
    return f"{value:.3g}" if value < 1000 else f"{value:.3e}"


def _plain_log(axis: Any) -> None:
    """A log axis labelled 1, 2, 5, 10, ... in plain numbers (no math text)."""
    axis.set_major_locator(LogLocator(base=10.0, subs=(1.0, 2.0, 5.0), numticks=12))
    axis.set_major_formatter(FuncFormatter(lambda value, _: f"{value:g}"))
    axis.set_minor_formatter(NullFormatter())


def _legend_below(figure: Figure, ax: Axes) -> None:
    """The legend in one row under the chart, where it covers no point."""
    handles, labels = ax.get_legend_handles_labels()
    figure.legend(handles, labels, loc="outside lower center", ncols=max(1, len(labels)))


def _log_scale_with_infinite(
    ax: Axes,
    top: float,
    infinite: list[int],
    infinite_label: str,
    threshold: float,
    threshold_label: str,
    *,
    markersize: float,
) -> None:
    """A log axis from 0.9 to ``top`` with the threshold line, and the infinite values (at
    ``infinite`` on the x axis) as triangles near the top, where no finite value can be."""
    if infinite:
        ax.plot(
            infinite,
            [top / 1.6] * len(infinite),
            "^",
            color=BLACK,
            markersize=markersize,
            label=infinite_label,
        )
    _threshold_line(ax, threshold, threshold_label, vertical=False)
    ax.set_yscale("log")
    _plain_log(ax.yaxis)
    ax.set_ylim(0.9, top)


def _threshold_line(ax: Axes, value: float, label: str, *, vertical: bool) -> None:
    if vertical:
        ax.axvline(value, color=BLACK, linestyle="--", linewidth=1.0, label=label)
    else:
        ax.axhline(value, color=BLACK, linestyle="--", linewidth=1.0, label=label)


def _lollipops(
    ax: Axes,
    names: Sequence[str],
    values: Sequence[float | None],
    limit: float,
    intervals: Sequence[Sequence[float] | None] | None,
    *,
    base: float,
    limit_label: str,
) -> None:
    """Horizontal lollipops on a log axis: blue circles at or below the limit, vermillion diamonds
    above it."""
    count = len(names)
    ys = list(range(count))[::-1]
    finite = [v for v in values if v is not None and math.isfinite(v)]
    top = max([limit, *finite]) * 2.0
    if intervals:
        top = max(top, *[iv[1] * 1.3 for iv in intervals if iv and math.isfinite(iv[1])])
    below_x, below_y, above_x, above_y, aliased_y = [], [], [], [], []
    for y, value in zip(ys, values, strict=True):
        if value is None or not math.isfinite(value):
            aliased_y.append(y)
            continue
        ax.hlines(y, base, value, color=GREY, linewidth=0.8)
        if value > limit:
            above_x.append(value)
            above_y.append(y)
        else:
            below_x.append(value)
            below_y.append(y)
    if intervals:
        for y, interval in zip(ys, intervals, strict=True):
            if interval and all(math.isfinite(v) for v in interval[:2]):
                low, high = interval[0], interval[1]
                ax.hlines(y, max(low, base * 0.5), high, color=SKY, linewidth=3.2, alpha=0.9)
        ax.plot([], [], color=SKY, linewidth=3.2, label="interval")
    ax.plot(below_x, below_y, "o", color=BLUE, markersize=5, label="at or below")
    ax.plot(above_x, above_y, "D", color=VERMILLION, markersize=5, label="above")
    if aliased_y:
        ax.plot(
            [top / 1.6] * len(aliased_y),
            aliased_y,
            ">",
            color=BLACK,
            markersize=6,
            label="aliased (infinite)",
        )
    _threshold_line(ax, limit, limit_label, vertical=True)
    ax.set_xscale("log")
    _plain_log(ax.xaxis)
    ax.set_xlim(base * 0.9, top)
    ax.set_ylim(-0.7, count - 0.3)
    ax.set_yticks(ys, [_short(n) for n in names])
    ax.tick_params(axis="y", length=0)
    ax.grid(axis="x", color="#DDDDDD", linewidth=0.5)
    ax.set_axisbelow(True)


def inflation_charts(assessment: Any) -> list[Chart]:
    """VIF of every predictor on a log axis, the threshold marked; intervals when present."""
    variables = list(assessment.variables)
    threshold = float(assessment.threshold)
    charts = []
    chunks = [variables[i : i + PER_CHART] for i in range(0, len(variables), PER_CHART)]
    for number, chunk in enumerate(chunks, start=1):
        names = [v.name for v in chunk]
        values = [v.vif for v in chunk]
        intervals = [getattr(v, "vif_interval", None) for v in chunk]
        has_intervals = any(iv is not None for iv in intervals)
        height = 1.3 + 0.22 * len(chunk)
        figure = Figure(figsize=(WIDTH_IN, height), layout="constrained")
        ax = figure.add_subplot()
        _lollipops(
            ax,
            names,
            values,
            threshold,
            intervals if has_intervals else None,
            base=1.0,
            limit_label=f"threshold {threshold:g} (rule of thumb)",
        )
        ax.set_xlabel("variance inflation factor (log scale)")
        part = f" ({number} of {len(chunks)})" if len(chunks) > 1 else ""
        title = f"Variance inflation of each predictor{part}"
        ax.set_title(title, loc="left")
        _legend_below(figure, ax)
        above = [v.name for v in chunk if v.aliased or v.above_threshold]
        description = (
            f"Horizontal dot chart of the VIF of {len(chunk)} predictors on a log scale with a "
            f"dashed line at the threshold {threshold:g}. "
            + "; ".join(f"{v.name} {_fmt(v.vif)}" for v in chunk)
            + f". Above the threshold: {', '.join(above) if above else 'none'}."
        )
        charts.append(_svg(figure, f"vif{number}", title, description))
    return charts


def terms_chart(assessment: Any) -> Chart | None:
    """Scaled GVIF of each multi-column term against the square root of the threshold."""
    terms = [t for t in assessment.terms if len(t.columns) > 1]
    if not terms:
        return None
    limit = math.sqrt(float(assessment.threshold))
    figure = Figure(figsize=(WIDTH_IN, 1.3 + 0.26 * len(terms)), layout="constrained")
    ax = figure.add_subplot()
    _lollipops(
        ax,
        [f"{t.name} ({t.df} columns)" for t in terms],
        [t.gvif_scaled for t in terms],
        limit,
        None,
        base=1.0,
        limit_label=f"square root of the threshold, {limit:.3g}",
    )
    ax.set_xlabel("scaled GVIF (log scale)")
    title = "Multi-column terms: scaled generalized VIF"
    ax.set_title(title, loc="left")
    _legend_below(figure, ax)
    description = (
        f"Dot chart of the scaled GVIF of {len(terms)} terms against the square root of the "
        f"threshold, {limit:.3g}: "
        + "; ".join(f"{t.name} {_fmt(t.gvif_scaled)}" for t in terms)
        + "."
    )
    return _svg(figure, "terms", title, description)


def conditioning_chart(conditioning: Any) -> Chart | None:
    """Condition indices by component, and the proportions of the high-index components."""
    indices = list(conditioning.indices)
    if not indices:
        return None
    rows = list(conditioning.high_index_rows)
    threshold = float(conditioning.index_threshold)
    columns: list[str] = []
    for row in rows:
        for name in row.variables:
            if name not in columns:
                columns.append(name)
    columns = columns[:PER_CHART]
    wide = bool(rows)
    figure = Figure(
        figsize=(WIDTH_IN, 3.0 + (0.2 * len(rows) if wide else 0.0)), layout="constrained"
    )
    if wide:
        left, right = figure.subplots(1, 2, width_ratios=[1.0, 1.25])
    else:
        left, right = figure.add_subplot(), None
    finite = [(k, v) for k, v in enumerate(indices) if v is not None]
    null = [k for k, v in enumerate(indices) if v is None]
    xs = [k for k, _ in finite]
    ys = [v for _, v in finite]
    top = max([threshold, *ys]) * 2.0
    left.vlines(xs, 1.0, ys, color=GREY, linewidth=0.8)
    high = [(k, v) for k, v in finite if v > threshold]
    low = [(k, v) for k, v in finite if v <= threshold]
    left.plot(
        [k for k, _ in low], [v for _, v in low], "o", color=BLUE, markersize=4, label="at or below"
    )
    left.plot(
        [k for k, _ in high],
        [v for _, v in high],
        "D",
        color=VERMILLION,
        markersize=4.5,
        label="above",
    )
    _log_scale_with_infinite(
        left,
        top,
        null,
        "null (exact dependency)",
        threshold,
        f"index {threshold:g} (rule of thumb)",
        markersize=5,
    )
    left.set_xlabel("component (largest eigenvalue first)")
    left.set_ylabel("condition index (log scale)")
    left.set_title("Condition indices", loc="left")
    _legend_below(figure, left)
    left.grid(axis="y", color="#DDDDDD", linewidth=0.5)
    left.set_axisbelow(True)
    if right is not None:
        grid = [[0.0] * len(columns) for _ in rows]
        for i, row in enumerate(rows):
            for name, share in zip(row.variables, row.proportions, strict=True):
                if name in columns:
                    grid[i][columns.index(name)] = float(share)
        right.pcolormesh(grid, cmap="Blues", vmin=0.0, vmax=1.0, edgecolors="white", linewidth=0.8)
        limit = float(conditioning.proportion_threshold)
        for i, line in enumerate(grid):
            for j, share in enumerate(line):
                if share >= 0.1:
                    right.text(
                        j + 0.5,
                        i + 0.5,
                        f"{share:.2f}",
                        ha="center",
                        va="center",
                        fontsize=7,
                        color="white" if share > 0.55 else BLACK,
                        fontweight="bold" if share > limit else "normal",
                    )
        right.set_xticks(
            [j + 0.5 for j in range(len(columns))],
            [_short(c) for c in columns],
            rotation=40,
            ha="right",
            rotation_mode="anchor",
        )
        right.set_yticks(
            [i + 0.5 for i in range(len(rows))],
            [f"{r.component} (index {r.index:.3g})" for r in rows],
        )
        right.invert_yaxis()
        right.tick_params(length=0)
        for spine in right.spines.values():
            spine.set_visible(False)
        right.set_title(f"Variance proportions (bold above {limit:g})", loc="left")
    title = "Condition indices and the tangled variables' proportions"
    described_rows = "; ".join(
        f"component {r.component}, index {r.index:.3g}: "
        + ", ".join(f"{n} {s:.2f}" for n, s in zip(r.variables, r.proportions, strict=True))
        for r in rows
    )
    description = (
        f"Condition indices of {len(indices)} components on a log scale with a dashed line at "
        f"{threshold:g}; largest {_fmt(conditioning.condition_number)}. "
        + (
            f"Components above the line and their variance proportions: {described_rows}."
            if rows
            else "No component is above the line."
        )
    )
    return _svg(figure, "cond", title, description)


def removal_chart(removal: Any) -> Chart | None:
    """The largest VIF left after each drop of the removal sequence."""
    steps = list(removal.steps)
    threshold = float(removal.threshold)
    labels = ["all predictors", *[f"− {_short(s.drop)}" for s in steps]]
    values: list[float | None] = [removal.max_vif_before, *[s.max_vif_after for s in steps]]
    finite = [v for v in values if v is not None and math.isfinite(v)]
    top = max([threshold, *finite]) * 2.0
    figure = Figure(figsize=(WIDTH_IN, 2.9 + 0.06 * len(steps)), layout="constrained")
    ax = figure.add_subplot()
    xs = list(range(len(values)))
    shown = [(x, v) for x, v in zip(xs, values, strict=True) if v is not None]
    missing = [x for x, v in zip(xs, values, strict=True) if v is None]
    ax.plot(
        [x for x, _ in shown],
        [v for _, v in shown],
        "-o",
        color=BLUE,
        markersize=4.5,
        linewidth=1.4,
        label="largest VIF left",
    )
    _log_scale_with_infinite(
        ax,
        top,
        missing,
        "exact dependency left (infinite)",
        threshold,
        f"threshold {threshold:g} (rule of thumb)",
        markersize=6,
    )
    if len(steps) <= NAMED_STEPS:
        ax.set_xticks(
            xs,
            labels,
            rotation=35 if len(xs) > 4 else 0,
            ha="right" if len(xs) > 4 else "center",
            rotation_mode="anchor",
        )
    else:
        # Too many names to read side by side: the drops by number (the table names them).
        ax.set_xlabel("drops (numbered as in the table below; 0 is all predictors)")
        ax.xaxis.set_major_locator(MaxNLocator(integer=True))
    ax.set_ylabel("largest VIF left (log scale)")
    title = "Removal path: the largest VIF left after each drop"
    ax.set_title(title, loc="left")
    _legend_below(figure, ax)
    ax.grid(axis="y", color="#DDDDDD", linewidth=0.5)
    ax.set_axisbelow(True)
    description = (
        f"Line chart of the largest VIF left, on a log scale, with a dashed line at the "
        f"threshold {threshold:g}: before any drop {_fmt(removal.max_vif_before)}; "
        + "; ".join(f"after dropping {s.drop} {_fmt(s.max_vif_after)}" for s in steps)
        + "."
    )
    return _svg(figure, "removal", title, description)


def ridge_chart(ridge: Any, names: Sequence[str], chosen: tuple[str, float] | None) -> Chart | None:
    """Ridge VIFs (and coefficients, with a response) over the grid of k, the chosen k marked."""
    trace = [point for point in ridge.trace if point.k > 0]
    if not trace:
        return None
    ks = [point.k for point in trace]
    per_variable = all(len(point.vif) == len(names) for point in trace) and len(names) > 0
    coefficients = all(point.coefficients is not None for point in trace) and per_variable
    figure = Figure(figsize=(WIDTH_IN, 3.3), layout="constrained")
    axes = figure.subplots(1, 2) if coefficients else [figure.add_subplot()]
    ax = axes[0]
    if per_variable:
        for j in range(len(names)):
            series = [point.vif[j] for point in trace]
            if all(v is not None for v in series):
                ax.plot(ks, series, color=SKY, linewidth=0.7)
        ax.plot([], [], color=SKY, linewidth=0.7, label="each predictor")
    largest = [point.max_vif for point in trace]
    ax.plot(
        [k for k, v in zip(ks, largest, strict=True) if v is not None],
        [v for v in largest if v is not None],
        color=BLACK,
        linewidth=1.6,
        label="largest",
    )
    threshold = float(ridge.threshold)
    ax.axhline(
        threshold, color=BLACK, linestyle="--", linewidth=1.0, label=f"threshold {threshold:g}"
    )
    ax.set_xscale("log")
    ax.set_yscale("log")
    _plain_log(ax.yaxis)
    ax.set_xlabel("k (correlation scale, log)")
    ax.set_ylabel("ridge VIF (log scale)")
    ax.set_title("Ridge VIFs", loc="left")
    if coefficients:
        cx = axes[1]
        for j in range(len(names)):
            cx.plot(ks, [point.coefficients[j] for point in trace], color=BLUE, linewidth=0.8)
        cx.axhline(0.0, color=GREY, linewidth=0.6)
        cx.set_xscale("log")
        cx.set_xlabel("k (correlation scale, log)")
        cx.set_ylabel("standardized coefficient")
        cx.set_title("Coefficients", loc="left")
    for axis in axes:
        axis.xaxis.set_major_formatter(FuncFormatter(lambda value, _: f"{value:g}"))
        axis.xaxis.set_minor_formatter(NullFormatter())
        if chosen is not None and chosen[1] > 0:
            axis.axvline(
                chosen[1],
                color=VERMILLION,
                linestyle=":",
                linewidth=1.6,
                label=f"chosen k = {chosen[1]:.3g} ({chosen[0]})",
            )
        axis.grid(color="#EEEEEE", linewidth=0.5)
        axis.set_axisbelow(True)
    _legend_below(figure, ax)
    title = "Ridge trace"
    description = (
        f"Ridge trace over {len(ks)} values of k from {ks[0]:.3g} to {ks[-1]:.3g} on a log "
        f"scale: the largest ridge VIF falls from {_fmt(largest[0])} to {_fmt(largest[-1])}"
        + (f"; the chosen k is {chosen[1]:.3g} by the {chosen[0]} rule" if chosen else "")
        + (". The second panel shows the standardized coefficients." if coefficients else ".")
    )
    return _svg(figure, "ridge", title, description)
