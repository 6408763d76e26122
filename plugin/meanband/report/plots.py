"""Pictures of the results: an interval chart of all checks, and per check a run chart, Q-Q plot
and histogram (matplotlib, drawn headless)."""

from __future__ import annotations

import hashlib
import math
import os
import re
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from meanband.store.report_json import ReportError
from meanband.units import SECONDS, format_number, time_scale

__all__ = [
    "CHECK_CHOICES",
    "FORMATS",
    "PER_PAGE",
    "PlotResult",
    "PlotsUnavailable",
    "band_position",
    "check_formats",
    "require_matplotlib",
    "slugs",
    "write_plots",
]

FORMATS = ("png", "svg")
#: Checks per page of the interval chart; beyond about forty rows the labels crowd.
PER_PAGE = 40
_SLUG_MAX = 80

# Verdicts differ in marker shape and label, not only in colour (a colour-blind-safe trio).
_STYLE = {
    "PASS": {"marker": "o", "color": "#1a7837"},
    "FAIL": {"marker": "X", "color": "#b2182b"},
    "UNDECIDED": {"marker": "D", "color": "#b35806"},
}
_SCALE_LABEL = {1e-9: "ns", 1e-6: "µs", 1e-3: "ms", 1.0: "s"}


class PlotsUnavailable(ReportError):
    """matplotlib is not installed."""


def require_matplotlib() -> None:
    """Raise :class:`PlotsUnavailable` with the install command when matplotlib is missing."""
    try:
        import matplotlib  # noqa: F401
    except ImportError as exc:
        raise PlotsUnavailable(
            "meanband plots need matplotlib, which is not installed; install the extra with "
            "pip install 'pytest-meanband[plots]'"
        ) from exc


def check_formats(text: str | Sequence[str]) -> tuple[str, ...]:
    """Image formats from ``"png"``, ``"svg"`` or ``"png,svg"``; anything else is an error."""
    words = text.split(",") if isinstance(text, str) else list(text)
    formats = tuple(dict.fromkeys(w.strip().lower() for w in words if w.strip()))
    bad = [f for f in formats if f not in FORMATS]
    if bad or not formats:
        raise ReportError(
            f"unknown plot format {', '.join(bad) or repr(text)}; choose from "
            f"{', '.join(FORMATS)} (comma-separated for several)"
        )
    return formats


def slugs(rows: Sequence[Mapping[str, Any]]) -> list[str]:
    """A file-name stem per row from its node id and series; unique within ``rows``.

    A stem that had to be shortened, or that two rows would share, gets a short hash of the full
    name so that it stays unique and stable from run to run.
    """
    stems: list[str] = []
    seen: dict[tuple[str, str], int] = {}
    for row in rows:
        pair = (row["nodeid"], row["series"])
        ordinal = seen.get(pair, 0)
        seen[pair] = ordinal + 1
        name = row["nodeid"].replace(".py::", "--").replace("::", "--")
        if row["series"]:
            name += "--" + row["series"]
        stem = re.sub(r"[^A-Za-z0-9_.-]+", "-", name).strip("-.") or "check"
        full = f"{row['nodeid']}\0{row['series']}\0{ordinal}"
        if len(stem) > _SLUG_MAX:
            digest = hashlib.blake2s(full.encode(), digest_size=4).hexdigest()
            stem = f"{stem[:_SLUG_MAX].rstrip('-.')}-{digest}"
        if ordinal:
            stem += f"-{ordinal + 1}"
        stems.append(stem)
    counts: dict[str, int] = {}
    for stem in stems:
        counts[stem] = counts.get(stem, 0) + 1
    out = []
    for stem, row in zip(stems, rows, strict=True):
        if counts[stem] > 1:  # two different names reduced to the same characters
            digest = hashlib.blake2s(
                f"{row['nodeid']}\0{row['series']}".encode(), digest_size=4
            ).hexdigest()
            stem = f"{stem}-{digest}"
        out.append(stem)
    return out


#: Units whose zero is a convention: a one-sided band is drawn on a scale set by the data.
OFFSET_UNITS = frozenset({"degC", "°C", "degF", "°F"})


@dataclass(frozen=True)
class Position:
    """Where an interval lies relative to its band, on an axis shared by all units.

    Two-sided band: 0 is the low edge, 1 the high edge. An upper budget puts its edge at 1 and
    zero at 0 (a position is then the fraction of the budget); a lower limit puts its edge at 0
    and its own size at 1. In a unit whose zero is a convention (degC, degF) a one-sided band's
    scale is twice the farther of the mean and its bound from the edge instead. Open ends of
    one-sided bounds are infinite (the chart draws them as arrows).
    """

    low: float
    mean: float
    high: float


def band_position(decision: Mapping[str, Any]) -> Position:
    """The interval and mean of a decision mapped onto the band-relative axis."""
    band, interval = decision["band"], decision["interval"]
    low_edge, high_edge = float(band["low"]), float(band["high"])
    mean = float(interval["mean"])
    unit = band.get("unit") or decision.get("unit")
    if math.isfinite(low_edge) and math.isfinite(high_edge):
        origin, size = low_edge, high_edge - low_edge
    elif unit in OFFSET_UNITS:
        # A temperature's zero is a convention, so "a fraction of the limit" means nothing (a
        # PASS at 61.16 and a FAIL at 61.30 degC against 61.2 would both sit at 1.00): scale by
        # the data instead, twice the farther of the mean and its bound from the edge.
        edge = high_edge if math.isfinite(high_edge) else low_edge
        bound = float(interval["high"]) if math.isfinite(high_edge) else float(interval["low"])
        size = 2.0 * max(abs(edge - mean), abs(edge - bound)) if math.isfinite(bound) else 0.0
        size = size or 1.0
        origin = edge - size if math.isfinite(high_edge) else edge
    elif math.isfinite(high_edge):
        size = abs(high_edge)
        origin = high_edge - size
    else:
        size = abs(low_edge)
        origin = low_edge
    if not size > 0:  # a zero-width band, or an edge at zero: scale by the data instead
        spread = [abs(mean - e) for e in (low_edge, high_edge) if math.isfinite(e)]
        spread.append(abs(float(interval["high"]) - mean) if math.isfinite(interval["high"])
                      else abs(mean - float(interval["low"])))
        size = max(spread) or 1.0
        if not math.isfinite(low_edge):
            origin = high_edge - size

    def place(x: float) -> float:
        return (float(x) - origin) / size

    return Position(place(interval["low"]), place(mean), place(interval["high"]))


# --- drawing ------------------------------------------------------------------------------------


def _figure(width: float, height: float) -> Any:
    # The object interface with no pyplot: no global state, no GUI backend, nothing to close.
    from matplotlib.figure import Figure

    return Figure(figsize=(width, height), layout="constrained")


def _save(figure: Any, stem: Path, formats: Sequence[str], dpi: int) -> list[Path]:
    # Drawn into memory, then written atomically like the JSON report: a reader never sees half
    # an image, and a link planted at the name is replaced, never written through.
    import io

    from meanband.store.atomic import write_atomic

    paths = []
    for fmt in formats:
        path = stem.with_name(f"{stem.name}.{fmt}")
        image = io.BytesIO()
        figure.savefig(image, format=fmt, dpi=dpi,
                       metadata={"Software": None} if fmt == "png" else {"Date": None})
        paths.append(write_atomic(path, image.getvalue()))
    return paths


def _short_labels(rows: Sequence[Mapping[str, Any]], width: int = 48) -> list[str]:
    """Test names without their file where that leaves them unambiguous."""
    short = []
    for row in rows:
        text = row["nodeid"].split("::", 1)[-1]
        if row["series"]:
            text += f" [{row['series']}]"
        short.append(text if len(text) <= width else text[:width - 1] + "…")
    if len(set(short)) < len(short):
        return [_label(row, width) for row in rows]
    return short


def _label(row: Mapping[str, Any], width: int = 56) -> str:
    text = row["nodeid"].rsplit("/", 1)[-1]
    if row["series"]:
        text += f" [{row['series']}]"
    shown: str = text if len(text) <= width else "…" + text[-(width - 1):]
    return shown


def interval_chart_pages(
    rows: Sequence[Mapping[str, Any]],
    directory: Path,
    formats: Sequence[str],
    *,
    per_page: int = PER_PAGE,
    dpi: int = 100,
) -> list[Path]:
    """All checks against their bands, ``per_page`` to a page (``intervals-01.png``, ...)."""
    checks = [row for row in rows if row.get("decision")]
    if not checks:
        return []
    if per_page < 1:
        raise ReportError(f"checks per page must be at least 1, got {per_page}")
    pages = math.ceil(len(checks) / per_page)
    written: list[Path] = []
    for page in range(pages):
        chunk = checks[page * per_page:(page + 1) * per_page]
        title = "Intervals of the mean against their bands"
        if pages > 1:
            title += f" (page {page + 1} of {pages})"
        figure = _draw_intervals(chunk, title)
        written += _save(figure, directory / f"intervals-{page + 1:02d}", formats, dpi)
    return written


def _draw_intervals(rows: Sequence[Mapping[str, Any]], title: str) -> Any:
    import numpy as np

    positions = [band_position(row["decision"]) for row in rows]
    finite = [v for p in positions for v in (p.low, p.mean, p.high) if math.isfinite(v)]
    left = max(min([-0.25, *finite]), -2.0)
    right = min(max([1.25, *finite]), 3.0)
    figure = _figure(9.0, 1.6 + 0.32 * len(rows))
    ax = figure.add_subplot()
    y = np.arange(len(rows))[::-1]
    for yi, row, pos in zip(y, rows, positions, strict=True):
        band = row["decision"]["band"]
        start = 0.0 if math.isfinite(band["low"]) else left
        stop = 1.0 if math.isfinite(band["high"]) else right
        ax.barh(yi, stop - start, left=start, height=0.7, color="#d9d9d9", zorder=0)
        verdict = row["decision"]["verdict"]
        style = _STYLE[verdict]
        low, high = max(pos.low, left), min(pos.high, right)
        ax.plot([low, high], [yi, yi], color=style["color"], linewidth=2.2, zorder=2)
        for end, bound in ((pos.low, low), (pos.high, high)):
            if math.isfinite(end) and end == bound:
                ax.plot([bound], [yi], marker="|", markersize=10, color=style["color"], zorder=3)
            elif end != bound:  # an open or clipped end: an arrow says it goes on
                ax.plot([bound], [yi], marker="<" if bound == left else ">", markersize=6,
                        color=style["color"], zorder=3)
        mean = min(max(pos.mean, left), right)
        ax.plot([mean], [yi], linestyle="none", markersize=8, zorder=4,
                markeredgecolor="black", markeredgewidth=0.6, **style)
        if mean != pos.mean:  # off the chart: say where it is
            ax.annotate(f"mean at {format_number(pos.mean, 3)}", xy=(mean, yi),
                        xytext=(-6 if mean == right else 6, 7), textcoords="offset points",
                        ha="right" if mean == right else "left", fontsize=7,
                        color=style["color"])
        ax.annotate(verdict, xy=(1.01, yi), xycoords=("axes fraction", "data"), va="center",
                    fontsize=8, color=style["color"], fontweight="bold")
    ax.axvline(0.0, color="#555555", linewidth=0.8, linestyle="--", zorder=1)
    ax.axvline(1.0, color="#555555", linewidth=0.8, linestyle="--", zorder=1)
    ax.set_xlim(left, right)
    ax.set_ylim(-0.7, len(rows) - 0.3)
    ax.set_yticks(y, _short_labels(rows), fontsize=8)
    ax.set_xlabel("position in the band: 0 = low edge, 1 = high edge; a budget's edge is at 1, "
                  "zero at 0 (degC and degF: set by the data)", fontsize=8)
    ax.set_title(title, fontsize=10)
    from matplotlib.lines import Line2D
    from matplotlib.patches import Patch

    handles: list[Any] = [Patch(color="#d9d9d9", label="band")]
    handles += [Line2D([], [], linestyle="none", markeredgecolor="black", markersize=7,
                       label=verdict, marker=style["marker"], color=style["color"])
                for verdict, style in _STYLE.items()]
    figure.legend(handles=handles, loc="outside lower center", ncol=4, fontsize=8, frameon=False)
    return figure


def _scaled(row: Mapping[str, Any], values: Any) -> tuple[float, str]:
    """Divide timings into a readable unit; other units stay as they are."""
    unit = row.get("unit")
    if unit == SECONDS:
        import numpy as np

        factor = time_scale(float(np.mean(values)))
        return factor, _SCALE_LABEL[factor]
    return 1.0, unit or ""


def _axis_label(unit: str) -> str:
    return f"value ({unit})" if unit else "value"


def _band_edges(ax: Any, band: Mapping[str, Any], factor: float, unit: str, data: Any, *,
                vertical: bool) -> None:
    """Draw the band edges near the data; name the far ones at the border instead.

    An edge far from the trials would squash them into a flat line, hiding drift and warm-up;
    an edge within one data span of them stays in view, so a near miss shows.
    """
    import numpy as np

    lowest, highest = float(np.min(data)), float(np.max(data))
    span = highest - lowest or (abs(highest) * 0.01 or 1.0)
    view_low, view_high = lowest - 0.08 * span, highest + 0.08 * span
    first = True
    for edge in (band["low"], band["high"]):
        if not math.isfinite(edge):
            continue
        at = edge / factor
        if lowest - span <= at <= highest + span:
            line = ax.axvline if vertical else ax.axhline
            line(at, color="#b2182b", linewidth=1.2, linestyle="--", zorder=4,
                 label="band edge" if first else None)
            first = False
            view_low, view_high = min(view_low, at - 0.05 * span), max(view_high, at + 0.05 * span)
            continue
        above = at > highest
        text = f"band edge {format_number(at)}{' ' + unit if unit else ''} " + (
            ("→" if above else "←") if vertical else ("↑" if above else "↓"))
        if vertical:
            ax.text(0.99 if above else 0.01, 0.5, text, transform=ax.transAxes, rotation=90,
                    ha="right" if above else "left", va="center", fontsize=7, color="#b2182b")
        else:
            ax.text(0.5, 0.98 if above else 0.02, text, transform=ax.transAxes, ha="center",
                    va="top" if above else "bottom", fontsize=7, color="#b2182b")
    (ax.set_xlim if vertical else ax.set_ylim)(view_low, view_high)


def _draw_run(row: Mapping[str, Any], title: str) -> Any:
    import numpy as np

    values = np.asarray(row["values"], dtype=float)
    warmup = np.asarray(row.get("warmup") or [], dtype=float)
    factor, unit = _scaled(row, values)
    figure = _figure(8.0, 3.6)
    ax = figure.add_subplot()
    w = warmup.size
    if w:
        ax.axvspan(0.5, w + 0.5, color="#eeeeee", zorder=0, label=f"warm-up ({w}, discarded)")
        ax.plot(np.arange(1, w + 1), warmup / factor, marker=".", linestyle="-", linewidth=0.6,
                color="#999999", zorder=2)
    times = row.get("times")
    timed = isinstance(times, list) and len(times) == values.size and not w
    index = np.asarray(times, dtype=float) if timed else np.arange(w + 1, w + values.size + 1)
    ax.plot(index, values / factor, marker=".", linestyle="-", linewidth=0.6, color="#2166ac",
            zorder=3, label=f"trials ({values.size})")
    pooled = row.get("pooled")
    if pooled and len(pooled.get("counts", ())) > 1:  # where one run's trials end
        for i, boundary in enumerate(np.cumsum(pooled["counts"])[:-1]):
            ax.axvline(w + boundary + 0.5, color="#666666", linewidth=0.8, linestyle="-.",
                       zorder=1, label="next pooled run" if i == 0 else None)
    decision = row.get("decision")
    mean = float(np.mean(values))
    ax.axhline(mean / factor, color="black", linewidth=1.2, zorder=4, label="mean")
    if decision:
        interval = decision["interval"]
        low = interval["low"] if math.isfinite(interval["low"]) else None
        high = interval["high"] if math.isfinite(interval["high"]) else None
        level = f"{interval['confidence'] * 100:.4g}% interval"
        span_low = (low if low is not None else mean) / factor
        span_high = (high if high is not None else mean) / factor
        ax.axhspan(span_low, span_high, color="#92c5de", alpha=0.5, zorder=1, label=level)
        for bound in (low, high):
            if bound is not None:
                ax.axhline(bound / factor, color="#2166ac", linewidth=0.9, linestyle=":", zorder=4)
        shown = [v for v in (low, high) if v is not None]
        _band_edges(ax, decision["band"], factor, unit, np.concatenate(
            [values, warmup, np.asarray(shown, dtype=float)]) / factor, vertical=False)
        title += f" — {decision['verdict']}"
    ax.set_xlabel("time since the first reading (s)" if timed else "trial")
    ax.set_ylabel(_axis_label(unit))
    ax.set_title(title, fontsize=9)
    ax.legend(fontsize=7, loc="best")
    return figure


def _draw_qq(row: Mapping[str, Any], title: str) -> Any:
    import numpy as np
    from scipy import stats

    values = np.asarray(row["values"], dtype=float)
    factor, unit = _scaled(row, values)
    (theoretical, ordered), (slope, intercept, _r) = stats.probplot(values / factor, dist="norm")
    figure = _figure(4.8, 4.2)
    ax = figure.add_subplot()
    ax.plot(theoretical, ordered, linestyle="none", marker="o", markersize=3, color="#2166ac")
    ax.plot(theoretical, slope * theoretical + intercept, color="black", linewidth=1.0,
            label="least-squares line")
    decision = row.get("decision")
    normality = decision["diagnostics"]["normality"] if decision else None
    if normality and normality["testable"]:
        ax.text(0.03, 0.97, f"{normality['method']}: p = {normality['pvalue']:.3g}",
                transform=ax.transAxes, va="top", fontsize=8)
    ax.set_xlabel("normal quantile")
    ax.set_ylabel(f"ordered trials ({unit})" if unit else "ordered trials")
    ax.set_title(f"{title} — normal Q-Q", fontsize=9)
    ax.legend(fontsize=7, loc="lower right")
    return figure


def _draw_histogram(row: Mapping[str, Any], title: str) -> Any:
    import numpy as np
    from scipy import stats

    values = np.asarray(row["values"], dtype=float)
    factor, unit = _scaled(row, values)
    shown = values / factor
    figure = _figure(5.6, 3.6)
    ax = figure.add_subplot()
    _, edges, _ = ax.hist(shown, bins="auto", color="#92c5de", edgecolor="#2166ac",
                               linewidth=0.6, label="trials")
    mean = float(np.mean(shown))
    sd = float(np.std(shown, ddof=1)) if shown.size > 1 else 0.0
    if sd > 0 and len(edges) > 1:
        grid = np.linspace(edges[0], edges[-1], 200)
        width = float(edges[1] - edges[0])
        ax.plot(grid, stats.norm.pdf(grid, mean, sd) * shown.size * width, color="black",
                linewidth=1.0, label="normal, same mean and sd")
    ax.axvline(mean, color="black", linewidth=1.2, linestyle="-", label="mean")
    decision = row.get("decision")
    if decision:
        _band_edges(ax, decision["band"], factor, unit, shown, vertical=True)
    ax.set_xlabel(_axis_label(unit))
    ax.set_ylabel("trials")
    ax.set_title(f"{title} — histogram", fontsize=9)
    ax.legend(fontsize=7, loc="best")
    return figure


_PER_CHECK = (("run", _draw_run), ("qq", _draw_qq), ("hist", _draw_histogram))


#: Which checks get a run chart, Q-Q plot and histogram: every one, only those that did not
#: pass (a large suite's failures without thousands of files), or none (the interval chart only).
CHECK_CHOICES = ("all", "failed", "none")
_LISTED_SKIPS = 3


@dataclass(frozen=True)
class PlotResult:
    """What :func:`write_plots` wrote, and the rows it could not draw with the reason."""

    written: list[Path]
    skipped: list[tuple[str, str]]  # (row label, reason)

    def skipped_lines(self) -> list[str]:
        """One line per reason, naming a few of the rows it applies to."""
        by_reason: dict[str, list[str]] = {}
        for label, reason in self.skipped:
            by_reason.setdefault(reason, []).append(label)
        lines = []
        for reason, labels in by_reason.items():
            named = ", ".join(labels[:_LISTED_SKIPS])
            more = f" and {len(labels) - _LISTED_SKIPS} more" if len(labels) > _LISTED_SKIPS else ""
            lines.append(f"no per-check plots for {named}{more}: {reason}")
        return lines


def write_plots(
    rows: Sequence[Mapping[str, Any]],
    directory: str | os.PathLike[str],
    *,
    formats: Sequence[str] = ("png",),
    checks: str = "all",
    per_page: int = PER_PAGE,
    dpi: int = 100,
) -> PlotResult:
    """Write the interval chart pages and, per row with trials, ``<slug>.run/.qq/.hist``.

    ``checks`` says which rows get the per-check plots: ``all``, ``failed`` (FAIL or UNDECIDED)
    or ``none``.
    """
    require_matplotlib()
    formats = check_formats(formats)
    if checks not in CHECK_CHOICES:
        raise ReportError(f"checks={checks!r}: choose one of {', '.join(CHECK_CHOICES)}")
    target = Path(directory)
    target.mkdir(parents=True, exist_ok=True)
    written = interval_chart_pages(rows, target, formats, per_page=per_page, dpi=dpi)
    skipped: list[tuple[str, str]] = []
    for row, stem in zip(rows, slugs(rows), strict=True):
        if checks == "none":
            break
        decision = row.get("decision")
        if checks == "failed" and (decision is None or decision["verdict"] == "PASS"):
            continue
        values = row.get("values")
        if not values or len(values) < 2:
            why = ("the report was written without trials" if values is None
                   else "fewer than 2 trials")
            skipped.append((_label(row, 200), why))
            continue
        title = _label(row)
        for series, draw in _PER_CHECK:
            written += _save(draw(row, title), target / f"{stem}.{series}", formats, dpi)
    return PlotResult(written, skipped)
