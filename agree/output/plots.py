"""Figures for reports: matplotlib on the Agg backend, readable in colour and in grey.

Every figure here follows the same rules, because agreement figures end up in papers:

- agreement axes span a fixed, stated range (−0.2 to 1, or −1 to 1 when an estimate or an
  interval end falls below −0.2), so a small difference never looks large;
- count axes start at 0;
- colours come from the Okabe–Ito palette (colour-blind safe) and heat maps use cividis;
- nothing is told by colour alone: marker shapes, hatching and printed values carry the same
  information, so a grey print still reads.

Functions return a `matplotlib.figure.Figure`; `figure_png` turns one into PNG bytes. Nothing
here computes a statistic: the numbers come in already computed.
"""

from __future__ import annotations

import io
import math
import os
from pathlib import Path
from typing import Any, Mapping, Sequence

import matplotlib
import numpy as np

matplotlib.use("Agg", force=False)
from matplotlib.figure import Figure  # noqa: E402  (after choosing the backend)
from matplotlib.lines import Line2D  # noqa: E402
from matplotlib.patches import Rectangle  # noqa: E402
from matplotlib.ticker import FixedLocator, FuncFormatter, NullFormatter, ScalarFormatter  # noqa: E402

from agree.core.constants import TENTATIVE  # noqa: E402
from agree.core.files import atomic_write, through_memory  # noqa: E402
from agree.core.format import DEFAULT_DIGITS, format_value, percent_label  # noqa: E402
from agree.core.results import reaches_minimum  # noqa: E402

# Okabe & Ito (2008), "Color universal design": black first, then the seven colours.
OKABE_ITO = ("#000000", "#E69F00", "#56B4E9", "#009E73", "#F0E442", "#0072B2", "#D55E00", "#CC79A7")
MARKERS = ("o", "s", "^", "D", "v", "P", "X", "*")
HATCHES = ("", "///", "...", "xxx", "\\\\\\", "++", "ooo", "---")
LINESTYLES = ("-", "--", "-.", ":")

AGREEMENT_RANGE = (-0.2, 1.0)
WIDE_AGREEMENT_RANGE = (-1.0, 1.0)


def agreement_range(values: Sequence[float | None]) -> tuple[float, float]:
    """The fixed axis range for agreement values: −0.2..1 unless something falls below −0.2."""
    finite = [v for v in values if v is not None and math.isfinite(v)]
    if finite and min(finite) < AGREEMENT_RANGE[0]:
        return WIDE_AGREEMENT_RANGE
    return AGREEMENT_RANGE


def figure_png(fig: Figure, dpi: int = 150) -> bytes:
    """PNG bytes of a figure (white background, tight bounding box)."""
    buffer = io.BytesIO()
    fig.savefig(buffer, format="png", dpi=dpi, bbox_inches="tight", facecolor="white")
    return buffer.getvalue()


def _finite(x: Any) -> bool:
    return x is not None and isinstance(x, (int, float)) and math.isfinite(x)


def _short(label: Any, width: int = 28) -> str:
    text = str(label)
    return text if len(text) <= width else text[: width - 1] + "…"


def _new_figure(width: float, height: float) -> Figure:
    fig = Figure(figsize=(width, height), layout="constrained")
    return fig


def axis_number(value: float, pos: Any = None) -> str:
    """A tick label on an agreement axis in the house style (`agree.core.format`): no leading
    zero, the minus sign, no trailing zeros (−.2, 0, .4, 1)."""
    text = f"{value:.10g}"
    if text in ("-0", "0"):
        return "0"
    if text.startswith("0."):
        text = text[1:]
    elif text.startswith("-0."):
        text = "-" + text[2:]
    return text.replace("-", "\u2212")


def _agreement_axis(axis: Any) -> None:
    axis.set_major_formatter(FuncFormatter(axis_number))


def confusion_heatmap(matrix: Sequence[Sequence[float]], row_labels: Sequence[Any],
                      col_labels: Sequence[Any], *, row_title: str, col_title: str,
                      title: str) -> Figure:
    """Heat map of a confusion (or coincidence) table, every cell annotated with its count.

    The colour scale (cividis, from 0) is set by the disagreements alone, the off-diagonal
    cells, so the confusions the map exists to show are not washed out by the much larger
    agreeing counts; the agreeing cells on the diagonal are grey, outlined and hatched, outside
    the scale, with their counts printed.
    """

    values = np.asarray(matrix, dtype=float)
    q_rows, q_cols = values.shape
    agreeing = np.array([[str(r) == str(c) for c in col_labels] for r in row_labels], dtype=bool)
    agreeing = agreeing.reshape(q_rows, q_cols)
    off = values[~agreeing]
    top = float(np.nanmax(off)) if off.size and np.nanmax(off) > 0 else 1.0
    size = max(4.0, 0.55 * max(q_rows, q_cols) + 2.5)
    fig = _new_figure(size + 1.2, size)
    ax = fig.add_subplot()
    cmap = matplotlib.colormaps["cividis"].with_extremes(bad="white")
    image = ax.imshow(np.ma.masked_array(values, mask=agreeing), cmap=cmap, vmin=0, vmax=top, aspect="equal")
    for r in range(q_rows):
        for c in range(q_cols):
            v = values[r, c]
            text = format_value(v, "amount")
            if agreeing[r, c]:
                ax.add_patch(Rectangle((c - 0.5, r - 0.5), 1, 1, facecolor="0.88", hatch="///",
                                       edgecolor="black", linewidth=1.4))
                colour = "black"
            else:
                colour = "black" if v / top > 0.55 else "white"
            ax.text(c, r, text, ha="center", va="center", fontsize=8, color=colour,
                    bbox=dict(boxstyle="square,pad=0.1", fc="0.88", ec="none") if agreeing[r, c] else None)
    ax.set_xticks(range(q_cols), [_short(x, 20) for x in col_labels], rotation=45, ha="right")
    ax.set_yticks(range(q_rows), [_short(x, 24) for x in row_labels])
    ax.set_xlabel(col_title)
    ax.set_ylabel(row_title)
    ax.set_title(title, fontsize=10)
    bar = fig.colorbar(image, ax=ax, shrink=0.8)
    bar.set_label(f"Disagreements (count; scale 0 to {format_value(top, 'amount')}, the largest off-diagonal cell)\n"
                  "Agreeing cells: grey, hatched, not on this scale", fontsize=8)
    return fig


HEATMAP_LEGEND = ("The colour scale (cividis, from 0) is set by the disagreements alone, the cells off the "
                  "diagonal, so that the confusions stand out; the agreeing cells on the diagonal are grey and "
                  "hatched, outside the scale. Every cell's count is printed.")


def forest_plot(labels: Sequence[Any], estimates: Sequence[float | None],
                lower_bounds: Sequence[float | None], *, minimum: float, symbol: str, title: str,
                statuses: Sequence[str | None] | None = None, confidence_level: float = 0.95,
                digits: int = DEFAULT_DIGITS) -> Figure:
    """Per-code agreement drawn as the status is judged: on the one-sided lower bound.

    Each code gets a bar for its one-sided confidence interval, from the lower bound (marked by
    a vertical tick) up to 1, and a marker at the estimate; a code meets the minimum when its
    bar starts at or right of the minimum line. The marker's shape is the code's status (the
    status column of the per-code table when `statuses` are given, else judged here the same
    way): filled circle, "ok" (the bound reaches the minimum); open circle, "uncertain" (the
    estimate does, the bound does not); triangle, "below minimum"; diamond, "too rare" (not
    judged). Without a bound (no bootstrap) there is no bar and the status is the estimate's.
    Values are printed beside each row; the legend says all this in the figure.
    """
    n = len(labels)
    lo, hi = agreement_range(list(estimates) + list(lower_bounds))
    fig = _new_figure(7.0, max(2.6, 0.38 * n + 2.0))
    ax = fig.add_subplot()
    ys = list(range(n))[::-1]
    if statuses is None:
        statuses = [judged_status(e, b, minimum) for e, b in zip(estimates, lower_bounds)]
    for y, est, bound, status in zip(ys, estimates, lower_bounds, statuses):
        if _finite(bound):
            ax.hlines(y, max(bound, lo), hi, color=OKABE_ITO[5], linewidth=3, alpha=0.45)
            ax.plot([min(max(bound, lo), hi)], [y], marker="|", markersize=13, markeredgewidth=2,
                    color=OKABE_ITO[5], linestyle="none")
        if not _finite(est):
            ax.text(lo + 0.01, y, "undefined", va="center", fontsize=8, style="italic")
            continue
        marker, face = STATUS_MARKERS.get(str(status), ("s", "white"))
        ax.plot([min(max(est, lo), hi)], [y], marker=marker, markersize=7, color=OKABE_ITO[5],
                markerfacecolor=face, markeredgecolor="black", linestyle="none")
        ax.text(1.02, y, format_value(est, "coefficient", digits), va="center", fontsize=8,
                transform=ax.get_yaxis_transform())
    ax.axvline(minimum, color=OKABE_ITO[6], linestyle="--", linewidth=1.2)
    ax.text(minimum, 1.0, f" minimum {format_value(minimum, 'threshold')}", transform=ax.get_xaxis_transform(),
            va="bottom", fontsize=8, color="black")
    if minimum > TENTATIVE:
        ax.axvline(TENTATIVE, color="0.4", linestyle=":", linewidth=1)
    ax.axvline(0, color="0.75", linewidth=0.8)
    ax.set_xlim(lo, hi + 0.04)  # headroom so a marker at 1 is not clipped
    ax.set_ylim(-0.7, n - 0.3)
    ax.set_yticks(ys, [_short(x) for x in labels])
    _agreement_axis(ax.xaxis)
    level = percent_label(confidence_level)
    ax.set_xlabel(f"{symbol}: estimate (marker) and one-sided {level} lower bound (| and bar) "
                  f"(axis fixed at {axis_number(lo)} to {axis_number(hi)})")
    ax.set_title(title, fontsize=10)
    ax.grid(axis="x", color="0.9", linewidth=0.6)
    ax.set_axisbelow(True)
    shown = [s for s in STATUS_MARKERS if s in set(map(str, statuses))]
    handles = [Line2D([], [], marker=STATUS_MARKERS[s][0], markerfacecolor=STATUS_MARKERS[s][1],
                      markeredgecolor="black", color=OKABE_ITO[5], linestyle="none", label=STATUS_LABELS[s])
               for s in shown]
    handles.append(Line2D([], [], marker="|", markersize=10, markeredgewidth=2, color=OKABE_ITO[5], linewidth=3,
                          alpha=0.6, label=f"one-sided {level} interval from its lower bound: the status is judged "
                                           "on the bound"))
    ax.legend(handles=handles, fontsize=7, loc="upper center", bbox_to_anchor=(0.5, -0.18 - 0.6 / max(n, 1)),
              ncol=2, frameon=False)
    return fig


#: Marker (shape, face) of each per-code status, as in the per-code table.
STATUS_MARKERS = {"ok": ("o", OKABE_ITO[5]), "uncertain": ("o", "white"), "below minimum": ("^", "white"),
                  "too rare": ("D", "white"), "undefined": ("x", "white")}
STATUS_LABELS = {"ok": "ok: the lower bound reaches the minimum",
                 "uncertain": "uncertain: the estimate reaches it, the bound does not",
                 "below minimum": "below minimum: the estimate is below it",
                 "too rare": "too rare to judge", "undefined": "undefined"}


def judged_status(estimate: float | None, bound: float | None, minimum: float) -> str:
    """The status of one code judged on its one-sided lower bound (on the estimate when there is
    no bound), in the words of the per-code table."""
    if not _finite(estimate):
        return "undefined"
    if estimate < minimum:
        return "below minimum"
    if _finite(bound) and bound < minimum:
        return "uncertain"
    return "ok"


def _status_marker(estimate: float, low: float | None, minimum: float) -> tuple[str, str]:
    if estimate >= minimum:
        return ("o", OKABE_ITO[5]) if reaches_minimum(low, minimum) else ("o", "white")
    if estimate >= TENTATIVE:
        return "s", "white"
    return "^", "white"


MARKER_LEGEND = ("Each code's bar is its one-sided confidence interval, from its lower bound (the tick) up; the "
                 "status is judged on that bound, as in the per-code table. Markers (the estimate): filled circle, "
                 "ok (the bound is above the minimum); open circle, uncertain (the estimate does, the bound does "
                 "not); triangle, below the minimum; diamond, too rare to judge.")


def code_use_bars(codes: Sequence[Any], coders: Sequence[str], counts: Sequence[Sequence[float]], *,
                  title: str) -> Figure:
    """How often each coder applied each code: grouped horizontal bars from 0, hatched per coder."""

    counts = np.asarray(counts, dtype=float)          # coders x codes
    m, q = counts.shape
    fig = _new_figure(7.0, max(2.5, 0.22 * q * m + 0.3 * q + 1.2))
    ax = fig.add_subplot()
    height = 0.8 / max(m, 1)
    base = np.arange(q)[::-1].astype(float)
    for i, coder in enumerate(coders):
        y = base + 0.4 - height * (i + 0.5)
        bars = ax.barh(y, counts[i], height=height * 0.95, left=0, label=str(coder),
                       color=OKABE_ITO[(i + 1) % len(OKABE_ITO)], hatch=HATCHES[i % len(HATCHES)],
                       edgecolor="black", linewidth=0.5)
        ax.bar_label(bars, labels=[format_value(v, "amount") for v in counts[i]], padding=2, fontsize=7)
    ax.set_yticks(base, [_short(c) for c in codes])
    top = float(counts.max()) if counts.size else 1.0
    ax.set_xlim(0, max(1.0, top) * 1.15)
    ax.set_xlabel("Units the coder gave this code (count; axis starts at 0)")
    ax.set_title(title, fontsize=10)
    ax.legend(title="Coder", fontsize=8, title_fontsize=8, loc="lower right")
    ax.grid(axis="x", color="0.9", linewidth=0.6)
    ax.set_axisbelow(True)
    return fig


def rounds_trend(rounds: Sequence[str], series: Mapping[str, Sequence[tuple[float | None, float | None,
                                                                               float | None]]],
                 *, minimum: float, symbol: str, title: str, digits: int = DEFAULT_DIGITS) -> Figure:
    """Small multiples: one panel per series (overall first, then each code), agreement across
    rounds with interval bars and the minimum line, on the same fixed axis in every panel."""
    names = list(series)
    n = len(names)
    cols = min(3, max(1, n))
    rows = math.ceil(n / cols)
    every = [v for s in series.values() for triple in s for v in triple]
    lo, hi = agreement_range(every)
    fig = _new_figure(3.0 * cols + 0.6, 2.3 * rows + 0.8)
    axes = fig.subplots(rows, cols, squeeze=False, sharex=True, sharey=True)
    x = list(range(len(rounds)))
    for k, name in enumerate(names):
        ax = axes[k // cols][k % cols]
        points = series[name]
        xs = [i for i, (e, _, _) in zip(x, points) if _finite(e)]
        es = [e for e, _, _ in points if _finite(e)]
        for i, (e, low, high) in zip(x, points):
            if _finite(low) and _finite(high):
                ax.vlines(i, max(low, lo), min(high, hi), color=OKABE_ITO[5], linewidth=1.6)
        ax.plot(xs, [min(max(e, lo), hi) for e in es], color="black",
                linestyle=LINESTYLES[0] if k == 0 else LINESTYLES[1], linewidth=1)
        for i, e in zip(xs, es):
            marker, face = _status_marker(e, None, minimum)
            ax.plot([i], [min(max(e, lo), hi)], marker=marker, markersize=6, color=OKABE_ITO[5],
                    markerfacecolor=face if face != "white" else "white", markeredgecolor="black")
            ax.annotate(format_value(e, "coefficient", digits), (i, min(max(e, lo), hi)),
                        textcoords="offset points", xytext=(5, -9), fontsize=7)
        ax.axhline(minimum, color=OKABE_ITO[6], linestyle="--", linewidth=1)
        if minimum > TENTATIVE:
            ax.axhline(TENTATIVE, color="0.4", linestyle=":", linewidth=0.8)
        ax.set_title(_short(name, 32), fontsize=9, fontweight="bold" if k == 0 else "normal")
        ax.set_ylim(lo, hi + 0.04)  # headroom so a marker at 1 is not clipped
        ax.set_xlim(-0.5, len(rounds) - 0.5)
        ax.set_xticks(x, [_short(r, 10) for r in rounds])
        ax.grid(axis="y", color="0.9", linewidth=0.6)
        _agreement_axis(ax.yaxis)
        if k % cols == 0:
            ax.set_ylabel(f"{symbol} (axis {axis_number(lo)} to {axis_number(hi)})", fontsize=8)
        if k // cols == rows - 1:
            ax.set_xlabel("Round", fontsize=8)
    for k in range(n, rows * cols):
        axes[k // cols][k % cols].set_visible(False)
    fig.suptitle(f"{title}\nDashed line: minimum {format_value(minimum, 'threshold')}; dotted line: "
                 f"{format_value(TENTATIVE, 'threshold')}; bars: two-sided intervals",
                 fontsize=9)
    return fig


def rounds_trend_figure(result: Any, *, digits: int = DEFAULT_DIGITS) -> Figure:
    """Small multiples of α per round of a `RoundsResult` (overall, then each code) with the
    minimum line."""
    names = [r.round + (" (drift)" if r.drift else "") for r in result.rounds]
    series = {"All codes": [(r.overall.estimate, r.overall.ci_low, r.overall.ci_high) for r in result.rounds]}
    for code in result.codes:
        series[code] = [(r.per_code[code].estimate, r.per_code[code].ci_low, r.per_code[code].ci_high)
                        if code in r.per_code else (None, None, None) for r in result.rounds]
    return rounds_trend(names, series, minimum=result.minimum, symbol="α",
                        title="Agreement per round (per code: presence/absence α)", digits=digits)


def assurance_figure(plan: Any) -> Figure:
    """The assurance curve of a `Plan`: simulated assurance (±2 Monte Carlo errors), the smoothed
    curve, the wanted assurance and the units needed."""
    units = np.array([p.units for p in plan.curve])
    raw = np.array([p.assurance for p in plan.curve])
    err = np.array([p.mc_error for p in plan.curve])
    smooth = np.array([p.smoothed for p in plan.curve])
    fig = Figure(figsize=(6.4, 4.0), dpi=120)
    ax = fig.subplots()
    ax.errorbar(units, raw, yerr=2 * err, fmt="o", ms=4, capsize=2, label="simulated (±2 MC errors)")
    fit = plan.details.get("fit")
    if fit:
        xs = np.geomspace(units.min(), units.max(), 200)
        ax.plot(xs, _normal_cdf(fit["intercept"] + fit["slope_sqrt_units"] * np.sqrt(xs)),
                label="smoothed")
    else:
        ax.plot(units, smooth, label="smoothed (monotone)")
    target = plan.inputs["assurance"]
    ax.axhline(target, ls="--", lw=1, color="grey")
    if plan.units_needed is not None:
        ax.axvline(plan.units_needed, ls=":", lw=1, color="grey")
        ax.annotate(f"{plan.units_needed:,} units", (plan.units_needed, 0.02), rotation=90,
                    ha="right", va="bottom", fontsize=8)
    ax.set_xscale("log")
    nice = [t for t in (10, 20, 50, 100, 200, 500, 1000, 2000, 5000, 10000, 20000, 50000, 100000)
            if units.min() * 0.9 <= t <= units.max() * 1.1]
    ax.xaxis.set_major_locator(FixedLocator(nice or list(units)))
    ax.xaxis.set_major_formatter(ScalarFormatter())
    ax.xaxis.set_minor_formatter(NullFormatter())
    ax.set_ylim(-0.02, 1.02)
    _agreement_axis(ax.yaxis)           # a probability: the house style's ticks (0, .2, ..., 1)
    ax.set_xlabel("units coded by every coder")
    ax.set_ylabel(f"P(lower bound > {format_value(plan.inputs['minimum'], 'threshold')})")
    ax.set_title(f"Assurance: expected alpha {format_value(plan.inputs['expected'], 'coefficient')}, "
                 f"{plan.inputs['coders']} coders", fontsize=10)
    ax.legend(fontsize=8, loc="lower right")
    fig.tight_layout()
    return fig


def _normal_cdf(x: np.ndarray) -> np.ndarray:
    from scipy.stats import norm

    return norm.cdf(x)


def save_figure(fig: Figure, path: str | os.PathLike, *, dpi: int = 150) -> Path:
    """Write a figure to `path` in the format its suffix names (.png, .svg, .pdf), atomically."""
    path = Path(path)
    fmt = path.suffix.lower().lstrip(".") or "png"
    return atomic_write(path, lambda tmp: through_memory(
        lambda buffer: fig.savefig(buffer, format=fmt, dpi=dpi, bbox_inches="tight", facecolor="white"), tmp))
