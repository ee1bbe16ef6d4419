"""Plots for the HTML report, drawn with matplotlib (imported only here) and returned as inline SVG.

Each function draws from the report's figure data (:attr:`Report.figures`,
gathered by the pipeline from the run's statistics; no plot reads the run
itself) and returns an SVG fragment, or None when the plot has nothing to
show (no fit, fewer than two numeric predictors). Large tables are sampled
deterministically and the caption says so. Text is written as SVG text elements, which matplotlib's XML
writer escapes, so no data text becomes markup; the page names no font file.
"""

from __future__ import annotations

import io
import re
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from ..figures import evenly
from ..rule import fmt
from ..stats.resistant import RESIDUAL_LIMIT, RowClass
from ..text import inert

if TYPE_CHECKING:
    from matplotlib.figure import Figure

    from ..outcome import Report

VIF_LINES = ((5.0, "common practice"), (10.0, "common practice"))
"""VIF reference lines used when no installed rule declares VIF thresholds."""
MAX_POINTS = 4000
RASTER_POINTS = 500
"""Above this many points the point cloud is embedded as an image inside the SVG, to keep the page small."""
COLOURS = {"point": "#5b7083", "flagged": "#b3261e", "contour": "#c77700", "present": "#e8eef3", "missing": "#1f3a5f", "intended": "#cfe3cf", "observed": "#1f3a5f"}


@dataclass(frozen=True)
class Plot:
    """One drawn plot: a title, the inline SVG and a caption of plain text (escaped by the page)."""

    key: str
    title: str
    svg: str
    caption: str


def _plain(text: object) -> str:
    """Text drawn literally by matplotlib: made inert (:func:`prefit.text.inert`), dollar signs escaped (they would start mathematics)."""
    return inert(text).replace("\\", "\\\\").replace("$", r"\$")


def _svg(figure: "Figure", key: str) -> str:
    import matplotlib

    buffer = io.StringIO()
    with matplotlib.rc_context({"svg.hashsalt": "prefit", "svg.fonttype": "none", "svg.image_inline": True}):
        figure.savefig(buffer, format="svg", metadata={"Date": None}, dpi=150)
    text = buffer.getvalue()
    text = text[text.index("<svg") :]
    text = re.sub(r"<!--.*?-->\n?", "", text, flags=re.S)
    text = re.sub(r'\bid="([^"]+)"', lambda m: f'id="{key}-{m.group(1)}"', text)
    text = re.sub(r"url\(#([^)]+)\)", lambda m: f"url(#{key}-{m.group(1)})", text)
    text = re.sub(r'href="#([^"]+)"', lambda m: f'href="#{key}-{m.group(1)}"', text)
    text = text.replace("<svg ", f'<svg role="img" aria-labelledby="{key}-title" class="plot" ', 1)
    return text


def _figure(width: float, height: float) -> "Figure":
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    figure = Figure(figsize=(width, height), dpi=100, layout="constrained")
    FigureCanvasAgg(figure)
    return figure


def cook_contour(hat: np.ndarray, level: float, parameters: int, df_resid: int) -> np.ndarray:
    """The |externally studentized residual| at which a row of leverage ``hat`` has Cook's distance ``level``.

    Cook's distance fixes the internally studentized residual,
    ``r^2 = D k (1 - h) / h``, and ``t = r sqrt((n - k - 1) / (n - k - r^2))``
    turns it into the externally studentized one; NaN where no residual reaches ``level``.

    References
    ----------
    Cook, R. D. (1977). Detection of influential observation in linear
    regression. Technometrics 19(1), 15-18. Belsley, Kuh & Welsch (1980), Regression Diagnostics, eq. 2.26.
    """
    hat = np.asarray(hat, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        internal = level * parameters * (1.0 - hat) / hat
        external = np.sqrt(internal * (df_resid - 1) / (df_resid - internal))
    return np.where((internal < df_resid) & (hat > 0) & (hat < 1), external, np.nan)


def influence(report: "Report", key: str = "influence") -> Plot | None:
    """Leverage against externally studentized residual, with Cook's distance contours and flagged rows labelled.

    The measures are the run's shared influence statistics; the contours are exact in these coordinates.
    """
    data = report.figures.influence if report.figures is not None else None
    if data is None:
        return None
    hat, studentized, cook = data.hat, data.studentized, data.cooks
    rank, df_resid, levels, flagged = data.rank, data.df_resid, list(data.levels), data.marked
    n = hat.size
    finite = np.flatnonzero(np.isfinite(studentized) & np.isfinite(cook))
    beyond = finite[cook[finite] >= levels[0][0]]
    by_cook = finite[np.argsort(-cook[finite], kind="stable")]
    shown = np.union1d(np.union1d(beyond, flagged), np.union1d(by_cook[: MAX_POINTS // 10], evenly(finite, MAX_POINTS)))
    figure = _figure(7.0, 4.6)
    axes = figure.add_subplot(1, 1, 1)
    axes.scatter(hat[shown], studentized[shown], s=12, color=COLOURS["point"], alpha=0.7, linewidths=0, label="complete cases", rasterized=shown.size > RASTER_POINTS)
    if flagged.size:
        axes.scatter(hat[flagged], studentized[flagged], s=22, color=COLOURS["flagged"], linewidths=0, label="rows named by influence or outlier findings")
    h_max = float(np.max(hat[finite]))
    grid = np.linspace(max(1e-4, float(np.min(hat[finite])) * 0.9), min(0.999, max(h_max * 1.15, 3.0 * rank / n)), 200)
    r_lim = max(3.0, float(np.nanmax(np.abs(studentized[finite]))) * 1.1)
    contours_drawn = 0
    for (level, word), style in zip(levels, ("--", ":")):
        bound = cook_contour(grid, level, rank, df_resid)
        keep = np.isfinite(bound) & (bound <= r_lim * 1.05)
        contours_drawn += int(keep.any())
        axes.plot(grid[keep], bound[keep], style, color=COLOURS["contour"], linewidth=1, label=f"Cook's distance {level:.3g} ({word})" if keep.any() else None)
        axes.plot(grid[keep], -bound[keep], style, color=COLOURS["contour"], linewidth=1)
    axes.axhline(0.0, color="#999999", linewidth=0.6)
    labelled = dict(data.labelled)
    for label, i in labelled.items():
        axes.annotate(_plain(label), (hat[i], studentized[i]), xytext=(4, 4), textcoords="offset points", fontsize=7, color=COLOURS["flagged"])
    axes.set_ylim(-r_lim, r_lim)
    axes.set_xlabel("leverage (hat value)")
    axes.set_ylabel("studentized residual (external)")
    axes.legend(loc="best", fontsize=7, frameon=False)
    axes.grid(alpha=0.25)
    sampled = "" if shown.size == finite.size else f" Showing {shown.size:,} of {finite.size:,} rows (every row beyond the first contour and every named row included)."
    caption = (
        f"Each point is a complete case ({n:,}); the curves are Cook's distance "
        + " and ".join(f"{level:.3g} ({word})" for level, word in levels)
        + f" for {rank} parameters. Labelled: rows named by influence or outlier findings "
        f"(or, when none are, rows beyond the first contour); "
        + (f"{len(labelled)} label(s), each at the row of that label with the largest Cook's distance." if labelled else "no row qualifies.")
        + ("" if contours_drawn else " Both contours lie beyond the plotted range: no row comes near them.")
        + sampled
    )
    return Plot(key, "Leverage and residuals", _svg(figure, key), caption)


def missingness(report: "Report", key: str = "missingness") -> Plot | None:
    """A rows x columns map of missing values (null or NaN), sampled when large, with the complete-case count."""
    data = report.figures.missing if report.figures is not None else None
    if data is None:
        return None
    columns, counts, rows, picked, mask = data.columns, data.counts, data.table_rows, data.rows, data.mask
    if not any(counts) and len(columns) == data.table_columns:
        return Plot(key, "Missing values", "", f"No missing values: all {rows:,} rows are complete in every column.")
    figure = _figure(min(1.2 + 0.28 * len(columns), 12.0), 4.6)
    axes = figure.add_subplot(1, 1, 1)
    from matplotlib.colors import ListedColormap

    axes.imshow(mask.astype(np.int8), aspect="auto", interpolation="nearest", cmap=ListedColormap([COLOURS["present"], COLOURS["missing"]]), vmin=0, vmax=1)
    axes.set_xticks(range(len(columns)), [_plain(f"{c} ({k:,})") for c, k in zip(columns, counts)], rotation=90, fontsize=7)
    axes.set_ylabel("row" + (" (sampled)" if picked.size < rows else ""))
    ticks = np.linspace(0, picked.size - 1, min(6, picked.size)).round().astype(int)
    axes.set_yticks(ticks, [f"{int(picked[t]) + 1:,}" for t in ticks], fontsize=7)
    axes.set_title(f"complete cases: {data.complete_cases:,} of {rows:,} rows", fontsize=9)
    sampled = f" Showing {picked.size:,} evenly spaced rows of {rows:,}." if picked.size < rows else ""
    shown_columns = "" if len(columns) == data.table_columns else f" First {len(columns)} of {data.table_columns} columns (target and predictors first)."
    caption = (
        f"Dark cells are missing values (null or NaN); each column label gives its count of missing values. "
        f"{data.complete_cases:,} rows have the target and every predictor present.{sampled}{shown_columns}"
    )
    return Plot(key, "Missing values", _svg(figure, key), caption)


def _vif_lines(report: "Report") -> tuple[list[tuple[float, str]], str]:
    """The VIF reference lines (value, grade word) and where their sources are told."""
    for rule in report.rules:
        if rule.id.split(".", 1)[-1] == "vif":
            graded = [(t.value, t.grade.word) for t in rule.thresholds if t.grade is not None]
            if graded:
                return sorted(graded), f"the thresholds of {rule.id} (prefit why {rule.id} gives their sources)"
    return [(value, "reference") for value, _ in VIF_LINES], "common practice"


def collinearity(report: "Report", key: str = "collinearity") -> Plot | None:
    """The predictor correlation heatmap (complete cases) beside a bar chart of VIFs with the threshold lines.

    Correlations and VIFs come from the run's shared collinearity statistics;
    a column in an exact dependency has no VIF of its own and is drawn as infinite.
    """
    data = report.figures.collinearity if report.figures is not None else None
    if data is None:
        return None
    names, shown, correlation = data.names, data.shown, data.correlation
    lines, lines_source = _vif_lines(report)
    figure = _figure(min(8.0 + 0.45 * len(names), 14.0), min(3.2 + 0.3 * len(names), 9.5))
    left, right = figure.subplots(1, 2, gridspec_kw={"width_ratios": [1.2, 1.0]})
    image = left.imshow(correlation, cmap="RdBu_r", vmin=-1, vmax=1)
    labels = [_plain(c) for c in names]
    left.set_xticks(range(shown), labels[:shown], rotation=90, fontsize=7)
    left.set_yticks(range(shown), labels[:shown], fontsize=7)
    if shown <= 12:
        for i in range(shown):
            for j in range(shown):
                left.text(j, i, f"{correlation[i, j]:.2f}", ha="center", va="center", fontsize=6, color="white" if abs(correlation[i, j]) > 0.6 else "black")
    figure.colorbar(image, ax=left, fraction=0.046, pad=0.04)
    left.set_title("correlation (complete cases)", fontsize=9)
    terms, inflation = data.terms, data.inflation
    finite = inflation[np.isfinite(inflation)]
    top = max(float(np.max(finite, initial=1.0)), max(v for v, _ in lines)) * 3.0
    heights = np.where(np.isfinite(inflation), np.maximum(inflation, 1.0), top)
    positions = np.arange(len(terms))
    bars = right.barh(positions, heights, left=0.0, color=[COLOURS["flagged"] if not np.isfinite(v) or v >= lines[0][0] else COLOURS["point"] for v in inflation])
    for bar, value in zip(bars, inflation):
        right.text(bar.get_width(), bar.get_y() + bar.get_height() / 2, " inf (off scale)" if not np.isfinite(value) else f" {value:.3g}", va="center", fontsize=7)
    for (value, word), style in zip(lines, ("--", ":", "-.")):
        right.axvline(value, linestyle=style, color=COLOURS["contour"], linewidth=1, label=f"{word} at {value:g}")
    right.legend(loc="upper center", bbox_to_anchor=(0.5, -0.12), ncol=len(lines), fontsize=7, frameon=False)
    right.set_xscale("log")
    right.set_xlabel("VIF (GVIF^(1/df) for a term of several dummies), log scale", fontsize=8)
    right.set_yticks(positions, [_plain(t) for t in terms], fontsize=7)
    right.invert_yaxis()
    right.set_xlim(1.0, top * 1.5)
    right.set_title("variance inflation by term", fontsize=9)
    infinite = int(np.sum(~np.isfinite(inflation)))
    caption = (
        "Pearson correlations among the design's predictor columns over the complete cases, and each term's variance "
        "inflation as the VIF rule grades it: the VIF of a numeric term, GVIF^(1/df) of a term of several dummies "
        "(Fox & Monette 1992, JASA 87), on a log scale. "
        + " and ".join(f"{style} line at {value:g} ({word})" for (value, word), style in zip(lines, ("Dashed", "dotted", "dash-dotted")))
        + f": {lines_source}."
        + (f" {infinite} term(s) in an exact dependency have infinite inflation, drawn to the edge as off scale." if infinite else "")
        + ("" if len(names) == data.columns else f" Correlations: first {len(names)} of {data.columns} columns.")
    )
    return Plot(key, "Correlation and variance inflation", _svg(figure, key), caption)


def _end(value: float) -> str:
    """A range end for a label: up to 4 significant digits, without trailing zeros."""
    text = fmt(value, 4)
    if "." in text and "e" not in text:
        text = text.rstrip("0").rstrip(".")
    return text


def ranges(report: "Report", key: str = "ranges") -> Plot | None:
    """Per numeric predictor: the observed range (min to max, 5th to 95th percentile) against the declared intended range."""
    bars = report.figures.ranges if report.figures is not None else ()
    if not bars:
        return None
    figure = _figure(7.5, 0.9 + 0.42 * len(bars))
    axes = figure.add_subplot(1, 1, 1)
    declared = 0
    for row, bar in enumerate(bars):
        if bar.observed is None:
            continue
        low, high, *inner = bar.observed
        window = bar.intended
        ends = [low, high, *(window or ())]
        span_low, span_high = min(ends), max(ends)
        width = span_high - span_low or 1.0

        def scaled(x: float) -> float:
            return (x - span_low) / width

        if window is not None:
            declared += 1
            axes.barh(row, scaled(window[1]) - scaled(window[0]), left=scaled(window[0]), height=0.7, color=COLOURS["intended"], edgecolor="#5f8f5f")
        axes.plot([scaled(low), scaled(high)], [row, row], color=COLOURS["observed"], linewidth=1.2)
        axes.plot([scaled(inner[0]), scaled(inner[1])], [row, row], color=COLOURS["observed"], linewidth=4.5, solid_capstyle="butt")
        if window is None or (low <= window[0] and high >= window[1]):
            axes.text(-0.03, row, _end(low), ha="right", va="center", fontsize=7)
            axes.text(1.03, row, _end(high), ha="left", va="center", fontsize=7)
        else:
            middle = min(max(scaled((low + high) / 2), 0.15), 0.85)
            axes.text(middle, row - 0.4, f"observed {_end(low)} to {_end(high)}", ha="center", va="bottom", fontsize=7)
    tick_labels = [_plain(b.name if b.intended is None else f"{b.name} (intended {_end(b.intended[0])} to {_end(b.intended[1])})") for b in bars]
    axes.set_yticks(range(len(bars)), tick_labels, fontsize=7)
    axes.invert_yaxis()
    axes.set_xlim(-0.25, 1.25)
    axes.set_xticks([])
    for side in ("top", "right", "bottom"):
        axes.spines[side].set_visible(False)
    axes.set_title("observed range (thin: min to max, thick: 5th to 95th percentile) and intended range (green)", fontsize=8)
    caption = (
        "Each predictor on its own scale, from the smaller to the larger of its observed and intended ends; the numbers are "
        "the observed minimum and maximum. "
        + (f"{declared} predictor(s) have a declared intended range." if declared else "No intended ranges were declared, so only observed ranges are shown.")
    )
    return Plot(key, "Observed and intended ranges", _svg(figure, key), caption)


CLASS_COLOURS = {
    RowClass.REGULAR: "#5b7083",
    RowClass.VERTICAL: "#c77700",
    RowClass.GOOD_LEVERAGE: "#3d6e99",
    RowClass.BAD_LEVERAGE: "#b3261e",
}


def robust_map(report: "Report", key: str = "robust_map") -> Plot | None:
    """Robust distance against standardized robust residual (Rousseeuw & van Zomeren 1990), rows coloured by class.

    Drawn only when ``influence.robust-distortion`` ran, from the run's shared
    high-breakdown fit and MCD distances (never fitted here).
    """
    data = report.figures.robust if report.figures is not None else None
    if data is None:
        return None
    cutoff, distance, residual, classes = data.cutoff, data.distance, data.residual, data.classes
    finite = np.flatnonzero(np.isfinite(distance) & np.isfinite(residual))
    unusual = finite[classes[finite] != RowClass.REGULAR]
    shown = np.union1d(unusual, evenly(finite, MAX_POINTS))
    figure = _figure(7.0, 4.6)
    axes = figure.add_subplot(1, 1, 1)
    counts: dict[RowClass, int] = {}
    for row_class, colour in CLASS_COLOURS.items():
        chosen = shown[classes[shown] == row_class]
        counts[row_class] = int(np.count_nonzero(classes[finite] == row_class))
        if chosen.size:
            axes.scatter(distance[chosen], residual[chosen], s=14, color=colour, linewidths=0, alpha=0.8, label=f"{row_class.word} ({counts[row_class]:,})", rasterized=chosen.size > RASTER_POINTS)
    for level in (RESIDUAL_LIMIT, -RESIDUAL_LIMIT):
        axes.axhline(level, linestyle="--", color=COLOURS["contour"], linewidth=1)
    axes.axvline(float(np.sqrt(cutoff)), linestyle=":", color=COLOURS["contour"], linewidth=1)
    for i, label in data.labelled:
        axes.annotate(_plain(label), (distance[i], residual[i]), xytext=(4, 4), textcoords="offset points", fontsize=7, color=CLASS_COLOURS[RowClass(int(classes[i]))])
    labelled = len(data.labelled)
    axes.set_xlabel(f"robust distance (MCD of {data.predictors} predictors)")
    axes.set_ylabel("standardized residual of the robust (MM) fit")
    axes.legend(loc="best", fontsize=7, frameon=False)
    axes.grid(alpha=0.25)
    sampled = "" if shown.size == finite.size else f" Showing {shown.size:,} of {finite.size:,} rows (every row outside the regular class included)."
    caption = (
        f"Each point is a complete case; dashed lines are +/-{RESIDUAL_LIMIT:g} robust SDs, the dotted line the square root of "
        f"the chi-square 0.975 quantile ({np.sqrt(cutoff):.2f}). Bad leverage points (far out and off the line) distort a "
        f"least-squares fit; good leverage points (far out, on the line) do not. {labelled} most extreme unusual row(s) labelled."
        + sampled
    )
    return Plot(key, "Robust residuals and robust distances", _svg(figure, key), caption)


PLOTS = (influence, robust_map, missingness, collinearity, ranges)


def draw_all(report: "Report", prefix: str = "") -> list[Plot]:
    """Every plot that applies to the report, in page order; ``prefix`` keeps SVG ids unique on a page.

    matplotlib's layout warnings (a figure too small for very many or very
    long labels) say nothing the reader can act on and stay off stderr.
    """
    import warnings

    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)
        drawn = [plot(report, f"{prefix}{plot.__name__}") for plot in PLOTS]
    return [p for p in drawn if p is not None]
