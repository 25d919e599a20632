"""Figures (``plot Y vs X``) as image files with matplotlib, and as text for a terminal.

Reads only :class:`~calc.outputs.figures.PlotSpec`. matplotlib is imported inside the drawing
functions, never at import time: the command line starts without it, and a sheet without
plots never pays for it. Figures are drawn with matplotlib's object interface on an Agg
canvas (no pyplot, no global figure state) and written atomically.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from io import BytesIO
from pathlib import Path
from typing import Any

import numpy as np

from ..errors import InputError, Source
from .figures import PlotSpec, Series

FORMATS = ("png", "svg", "pdf")
#: Figure size (inches) and resolution of raster output: 1200 × 750 pixels.
FIGURE_SIZE = (8.0, 5.0)
DPI = 150
#: Opacity of a σ band under its line.
BAND_ALPHA = 0.25


class PlotError(InputError):
    """A figure that cannot be drawn as asked (an unknown format, no matplotlib)."""

    def __init__(self, message: str, hint: str | None = None) -> None:
        super().__init__(message, hint=hint, source=Source("relsheet", ""))


# ---- shared: names, dates ---------------------------------------------------------------


def plot_file_name(spec: PlotSpec, fmt: str) -> str:
    """The file a figure goes to: its name (letters, digits, `_`, `-`) and the format."""
    safe = "".join(ch if ch.isalnum() or ch in "_-" else "_" for ch in spec.name)
    return f"{safe or 'plot'}.{fmt}"


def _time_scale(series: Series) -> str:
    """The time scale written after the dates (`2031-04-12T06:30:00 TDB` → `TDB`), or ``""``."""
    if not series.texts:
        return ""
    parts = series.texts[0].split()
    return parts[-1] if len(parts) > 1 and parts[-1].isalpha() else ""


def axis_label(series: Series) -> str:
    """`name [unit]`; a date axis as `name (scale)`: its numbers are days, its ticks dates."""
    if series.texts is not None:
        scale = _time_scale(series)
        return f"{series.name} ({scale})" if scale else series.name
    return series.label


def _date_positions(series: Series) -> np.ndarray | None:
    """Dates of an axis as numpy datetimes (the first date as written plus the days after it),
    or None when the first date does not read as an ISO date."""
    if not series.texts:
        return None
    first = series.texts[0].split()[0]
    try:
        start = np.datetime64(first, "us")
    except ValueError:
        return None
    offsets = np.round(np.asarray(series.values, dtype=float) * 86_400e6)
    return start + offsets.astype("timedelta64[us]")


def _values(series: Series) -> np.ndarray:
    return np.asarray(series.values, dtype=float)


def _title(spec: PlotSpec) -> str:
    return spec.heading or spec.name


def _y_label(spec: PlotSpec) -> str:
    """One line: its `name [unit]`; several in one unit: `a, b [unit]`."""
    units = {s.unit for s in spec.y}
    if len(spec.y) > 1 and len(units) == 1:
        unit = units.pop()
        names = ", ".join(s.name for s in spec.y)
        return f"{names} [{unit}]" if unit else names
    return ", ".join(s.label for s in spec.y)


# ---- matplotlib -------------------------------------------------------------------------


def _import_matplotlib() -> Any:
    try:
        import matplotlib
    except ImportError:
        raise PlotError("drawing figures needs matplotlib, which is not installed",
                        hint="`pip install matplotlib` adds it") from None
    return matplotlib


def _place_axis(axes: Any, which: str, series: Series) -> np.ndarray | None:
    """Date ticks on an axis of dates (matplotlib picks readable steps and writes each date
    once, briefly); returns the positions to plot at, or None for plain numbers."""
    dates = _date_positions(series)
    if dates is None:
        return None
    from matplotlib import dates as mdates

    locator = mdates.AutoDateLocator(minticks=3, maxticks=8)
    axis = axes.xaxis if which == "x" else axes.yaxis
    axis.set_major_locator(locator)
    axis.set_major_formatter(mdates.ConciseDateFormatter(locator))
    return dates


def draw(spec: PlotSpec) -> Any:
    """The matplotlib ``Figure`` of a spec, on an Agg canvas: lines of each y against x (σ as
    a band around its line), or a map with a colour scale over two axes; axis labels
    `name [unit]`, the heading as the title, `log x`/`log y` as asked."""
    _import_matplotlib()
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    figure = Figure(figsize=FIGURE_SIZE, dpi=DPI, layout="constrained")
    FigureCanvasAgg(figure)
    axes = figure.add_subplot()
    if spec.is_map:
        _draw_map(figure, axes, spec)
    else:
        _draw_lines(axes, spec)
    axes.set_title(_title(spec))
    if spec.log_x:
        axes.set_xscale("log")
    if spec.log_y:
        axes.set_yscale("log")
    if spec.notes:
        figure.text(0.01, 0.005, "\n".join(spec.notes), fontsize="x-small", va="bottom",
                    gid="notes")
    return figure


def _draw_lines(axes: Any, spec: PlotSpec) -> None:
    x_series = spec.x[0]
    dates = _place_axis(axes, "x", x_series)
    x = dates if dates is not None else _values(x_series)
    for series in spec.y:
        y = _values(series)
        (line,) = axes.plot(x, y, label=series.name, gid=f"line-{series.name}", linewidth=1.2)
        if series.sigma is not None:
            sigma = np.asarray(series.sigma, dtype=float)
            axes.fill_between(x, y - sigma, y + sigma, color=line.get_color(),
                              alpha=BAND_ALPHA, linewidth=0, gid=f"band-{series.name}")
    axes.set_xlabel(axis_label(x_series))
    axes.set_ylabel(_y_label(spec))
    if len(spec.y) > 1:
        axes.legend(loc="best", fontsize="small")
    axes.grid(True, linewidth=0.4, alpha=0.5)


def _draw_map(figure: Any, axes: Any, spec: PlotSpec) -> None:
    first, second = spec.x
    colour = spec.y[0]
    x_dates = _place_axis(axes, "x", first)
    y_dates = _place_axis(axes, "y", second)
    x = x_dates if x_dates is not None else _values(first)
    y = y_dates if y_dates is not None else _values(second)
    grid = np.asarray(colour.values, dtype=float)
    # values are indexed (x, y); an image's rows run along y
    mesh = axes.pcolormesh(x, y, grid.T, shading="nearest", gid=f"map-{colour.name}")
    bar = figure.colorbar(mesh, ax=axes)
    bar.set_label(colour.label)
    axes.set_xlabel(axis_label(first))
    axes.set_ylabel(axis_label(second))


def figure_bytes(spec: PlotSpec, fmt: str = "png") -> bytes:
    """The figure as a PNG, SVG or PDF file's bytes. SVG keeps its text as text (searchable,
    selectable); dates of creation are left out so that the same sheet gives the same file."""
    if fmt not in FORMATS:
        raise PlotError(f"figures are written as {', '.join(FORMATS)}, not `{fmt or '?'}`",
                        hint="name the file with .png, .svg or .pdf")
    matplotlib = _import_matplotlib()
    metadata: dict[str, dict[str, Any]] = {"png": {"Software": "relsheet"},
                                           "svg": {"Date": None}, "pdf": {"CreationDate": None}}
    settings = {"svg.fonttype": "none", "svg.hashsalt": spec.name}
    with matplotlib.rc_context(settings):
        figure = draw(spec)
        buffer = BytesIO()
        figure.savefig(buffer, format=fmt, dpi=DPI, metadata=metadata[fmt])
    return buffer.getvalue()


def write_plot(spec: PlotSpec, path: str | Path, fmt: str | None = None,
               force: bool = False) -> Path:
    """Draw ``spec`` into ``path`` (format from ``fmt`` or the file's suffix), atomically."""
    from ..files import atomic_write

    target = Path(path)
    fmt = fmt or target.suffix.lstrip(".").lower()
    atomic_write(target, figure_bytes(spec, fmt), force=force)
    return target


def write_plots(specs: Iterable[PlotSpec], folder: str | Path, fmt: str = "png",
                force: bool = False) -> list[Path]:
    """Every figure into ``folder`` (made if missing) as ``NAME.fmt``; the paths written."""
    if fmt not in FORMATS:
        raise PlotError(f"figures are written as {', '.join(FORMATS)}, not `{fmt or '?'}`",
                        hint="name the file with .png, .svg or .pdf")
    place = Path(folder)
    place.mkdir(parents=True, exist_ok=True)
    return [write_plot(spec, place / plot_file_name(spec, fmt), fmt, force) for spec in specs]


# ---- the terminal -----------------------------------------------------------------------

#: Braille dot bits by (column, row) inside one character (U+2800 block: 2 × 4 dots).
_DOTS = ((0x01, 0x02, 0x04, 0x40), (0x08, 0x10, 0x20, 0x80))
#: Shades of a map, lowest to highest (a cell without a value stays blank).
SHADES = "░▒▓█"


def _short(x: float) -> str:
    from .format import format_number

    return format_number(x, 4)


class _Scale:
    """Values → positions 0…1 along an axis (log10 on a log axis)."""

    def __init__(self, values: np.ndarray, log: bool) -> None:
        self.log = log
        data = self.forward(values)
        data = data[np.isfinite(data)]
        if data.size == 0:
            low, high = 0.0, 1.0
        else:
            low, high = float(data.min()), float(data.max())
        if low == high:   # a constant: centre it
            pad = abs(low) * 0.1 or 1.0
            low, high = low - pad, high + pad
        self.low, self.high = low, high

    def forward(self, values: np.ndarray) -> np.ndarray:
        values = np.asarray(values, dtype=float)
        if not self.log:
            return values
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.where(values > 0, np.log10(np.where(values > 0, values, 1.0)), np.nan)

    def unit(self, values: np.ndarray) -> np.ndarray:
        return (self.forward(values) - self.low) / (self.high - self.low)

    def value_at(self, fraction: float) -> float:
        position = self.low + fraction * (self.high - self.low)
        return 10 ** position if self.log else position


class _Dots:
    """A canvas of braille dots, ``width`` × ``height`` characters."""

    def __init__(self, width: int, height: int) -> None:
        self.width, self.height = width, height
        self.cells = np.zeros((height, width), dtype=np.int64)

    def plot(self, px: np.ndarray, py: np.ndarray) -> None:
        """Dots at pixel columns ``px`` and rows ``py`` (row 0 at the top); outside ignored."""
        inside = (px >= 0) & (px < 2 * self.width) & (py >= 0) & (py < 4 * self.height)
        px, py = px[inside], py[inside]
        bits = np.array(_DOTS, dtype=np.int64)[px % 2, py % 4]
        np.bitwise_or.at(self.cells, (py // 4, px // 2), bits)

    def line(self, fx: np.ndarray, fy: np.ndarray, dotted: bool = False) -> None:
        """A polyline through points at fractions 0…1 of the canvas (y up), broken where a
        point is missing; ``dotted`` leaves every other pixel out."""
        px = np.round(fx * (2 * self.width - 1))
        py = np.round((1 - fy) * (4 * self.height - 1))
        good = np.isfinite(px) & np.isfinite(py)
        if dotted:
            self.plot(px[good].astype(np.int64)[::2], py[good].astype(np.int64)[::2])
            return
        # segments between neighbours that both exist, each sampled once per pixel it spans
        joined = good[:-1] & good[1:]
        x0, y0, x1, y1 = px[:-1][joined], py[:-1][joined], px[1:][joined], py[1:][joined]
        # clip to a margin around the canvas so a far point costs no more than the canvas
        limit_x, limit_y = 4.0 * self.width, 8.0 * self.height
        x0, x1 = np.clip(x0, -limit_x, limit_x), np.clip(x1, -limit_x, limit_x)
        y0, y1 = np.clip(y0, -limit_y, limit_y), np.clip(y1, -limit_y, limit_y)
        steps = np.maximum(np.abs(x1 - x0), np.abs(y1 - y0)).astype(np.int64) + 1
        start = np.repeat(np.arange(steps.size), steps)
        offset = np.arange(start.size) - np.repeat(np.cumsum(steps) - steps, steps)
        t = offset / np.maximum(np.repeat(steps, steps) - 1, 1)
        xs = np.round(x0[start] + t * (x1 - x0)[start]).astype(np.int64)
        ys = np.round(y0[start] + t * (y1 - y0)[start]).astype(np.int64)
        lone = good.copy()
        lone[:-1] &= ~joined
        lone[1:] &= ~joined
        self.plot(np.concatenate([xs, px[lone].astype(np.int64)]),
                  np.concatenate([ys, py[lone].astype(np.int64)]))

    def rows(self) -> list[str]:
        return ["".join(chr(0x2800 + int(b)) for b in row) for row in self.cells]


def _envelope(x: np.ndarray, y: np.ndarray, columns: int) -> tuple[np.ndarray, np.ndarray]:
    """A long curve cut to its lowest and highest point in each pixel column (in their order
    along x), so drawing it costs the canvas, not the data. Needs x increasing."""
    keep = np.isfinite(x) & np.isfinite(y)
    if keep.sum() <= 4 * columns or not np.all(np.diff(x[keep]) >= 0):
        return x, y
    x, y = x[keep], y[keep]
    column = np.minimum((x * columns).astype(np.int64), columns - 1)
    starts = np.flatnonzero(np.r_[True, column[1:] != column[:-1]])
    low = np.minimum.reduceat(y, starts)
    high = np.maximum.reduceat(y, starts)
    ends = np.r_[starts[1:], y.size]
    middle = (x[starts] + x[ends - 1]) / 2
    xs = np.repeat(middle, 2)
    ys = np.column_stack([low, high]).ravel()
    return xs, ys


def _tick_labels(width: int, labels: Sequence[tuple[float, str]]) -> str:
    """Labels placed under fractions 0…1 of a line ``width`` long, leftmost first; one that
    would touch its neighbour is left out (the ends always stay)."""
    line = [" "] * width
    taken: list[tuple[int, int]] = []
    ordered = [labels[0], labels[-1], *labels[1:-1]] if len(labels) > 1 else list(labels)
    for fraction, text in ordered:
        text = text[:width]
        start = round(fraction * (width - 1) - (len(text) - 1) / 2)
        start = min(max(start, 0), width - len(text))
        end = start + len(text)
        if any(start <= b + 1 and a <= end + 1 for a, b in taken):
            continue
        taken.append((start, end))
        line[start:end] = text
    return "".join(line).rstrip()


def _x_ticks(series: Series, scale: _Scale, width: int) -> str:
    if series.texts is not None:   # dates: the first, middle and last as written
        values = _values(series)
        marks = []
        for fraction in (0.0, 0.5, 1.0):
            target = scale.value_at(fraction)
            index = int(np.nanargmin(np.abs(values - target)))
            marks.append((float(scale.unit(values[index:index + 1])[0]), series.texts[index]))
        return _tick_labels(width, marks)
    return _tick_labels(width, [(f, _short(scale.value_at(f))) for f in (0.0, 0.25, 0.5, 0.75, 1.0)])


def render_terminal(spec: PlotSpec, width: int = 72, height: int = 18) -> str:
    """The figure as text: braille dots for lines (σ as dotted edges of the band), block
    shades for a map, with the title, the axis ranges and labels around the frame. ``width``
    and ``height`` are the whole drawing's size in characters."""
    if spec.is_map:
        return _terminal_map(spec, width, height)
    return _terminal_lines(spec, width, height)


def _y_ticks(scale: _Scale, height: int) -> dict[int, str]:
    """Tick labels by canvas row: the top, the bottom and, on a tall canvas, the middle."""
    ticks = {0: _short(scale.value_at(1.0)), height - 1: _short(scale.value_at(0.0))}
    if height >= 5:
        middle = (height - 1) // 2
        ticks[middle] = _short(scale.value_at(1 - middle / (height - 1)))
    return ticks


def _margin(scale: _Scale, rows: int) -> int:
    """The width of the y tick labels of a canvas ``rows`` high."""
    return max(len(t) for t in _y_ticks(scale, rows).values())


def _frame(title: str, y_label: str, y_scale: _Scale, canvas_rows: list[str],
           right: list[str], x_ticks: str, x_label: str, footer: Sequence[str] = ()) -> str:
    """Title, the y label, the canvas with y ticks (top, middle, bottom) on a `┤` axis, the
    x axis with ticks and its label centred; ``right`` holds text beside each canvas row."""
    height = len(canvas_rows)
    width = len(canvas_rows[0]) if canvas_rows else 0
    ticks = _y_ticks(y_scale, height)
    margin = _margin(y_scale, height)
    room = margin + 2 + width + max((len(r) for r in right), default=0)
    lines = [title[:room], f"{' ' * margin} {y_label}"[:room]]
    for row, dots in enumerate(canvas_rows):
        mark = "┤" if row in ticks else "│"
        lines.append(f"{ticks.get(row, '').rjust(margin)} {mark}{dots}{right[row]}".rstrip())
    lines.append(f"{' ' * margin} └{'─' * width}")
    lines.append(f"{' ' * (margin + 2)}{x_ticks}".rstrip())
    lines.append(f"{' ' * (margin + 2)}{x_label.center(width)}".rstrip())
    lines += [line[:room] for line in footer]
    return "\n".join(lines)


def _terminal_lines(spec: PlotSpec, width: int, height: int) -> str:
    x_series = spec.x[0]
    ys = [_values(s) for s in spec.y]
    x_scale = _Scale(_values(x_series), spec.log_x)
    edges = [ys[0]]
    for series, y in zip(spec.y, ys):
        edges.append(y)
        if series.sigma is not None:
            sigma = np.asarray(series.sigma, dtype=float)
            edges += [y - sigma, y + sigma]
    y_scale = _Scale(np.concatenate([np.ravel(e) for e in edges]), spec.log_y)
    names = [s.name for s in spec.y]
    label_room = max(len(n) for n in names) + 2 if len(spec.y) > 1 else 0
    footer = ["dotted: ±1σ"] if any(s.sigma is not None for s in spec.y) else []
    canvas_height = max(3, height - 5 - len(footer))
    canvas_width = max(8, width - _margin(y_scale, canvas_height) - 2 - label_room)
    canvas = _Dots(canvas_width, canvas_height)
    fx = x_scale.unit(_values(x_series))
    ends: list[tuple[int, str]] = []
    for series, y in zip(spec.y, ys):
        fy = y_scale.unit(y)
        if series.sigma is not None:
            sigma = np.asarray(series.sigma, dtype=float)
            for edge in (y - sigma, y + sigma):
                canvas.line(*_envelope(fx, y_scale.unit(edge), 2 * canvas_width), dotted=True)
        canvas.line(*_envelope(fx, fy, 2 * canvas_width))
        finite = np.flatnonzero(np.isfinite(fx) & np.isfinite(fy))
        if finite.size:
            last = float(fy[finite[-1]])
            ends.append((int(round((1 - min(max(last, 0.0), 1.0)) * (canvas_height - 1))),
                         series.name))
    right = [""] * canvas_height
    if len(spec.y) > 1:   # each line's name beside where it ends
        for row, name in sorted(ends):
            free = [r for r in range(canvas_height) if not right[r]]
            if free:   # the free row nearest to where the line ends
                right[min(free, key=lambda r: (abs(r - row), r))] = f" ╴{name}"
    title = _title(spec) + (f"  ({spec.name})" if spec.heading else "")
    scales = [w for w, on in (("log x", spec.log_x), ("log y", spec.log_y)) if on]
    if scales:
        title += "  · " + ", ".join(scales)
    return _frame(title, _y_label(spec), y_scale, canvas.rows(), right,
                  _x_ticks(x_series, x_scale, canvas_width), axis_label(x_series), footer)


def _nearest(values: np.ndarray, targets: np.ndarray, scale: _Scale) -> np.ndarray:
    """For each target position (0…1 along an axis) the index of the nearest sample."""
    positions = scale.unit(values)
    distance = np.abs(positions[None, :] - targets[:, None])
    distance = np.where(np.isfinite(distance), distance, np.inf)
    return np.argmin(distance, axis=1)


def _terminal_map(spec: PlotSpec, width: int, height: int) -> str:
    first, second = spec.x
    colour = spec.y[0]
    grid = np.asarray(colour.values, dtype=float)
    x_scale = _Scale(_values(first), spec.log_x)
    y_scale = _Scale(_values(second), spec.log_y)
    finite = grid[np.isfinite(grid)]
    low, high = (float(finite.min()), float(finite.max())) if finite.size else (0.0, 1.0)
    span = high - low or 1.0
    steps = [low + span * k / len(SHADES) for k in range(len(SHADES) + 1)]
    items = [f"{SHADES[k]} {_short(steps[k])}…{_short(steps[k + 1])}" for k in range(len(SHADES))]
    legend = [f"{colour.label}:"]
    for item in items:   # the colour scale, on as many lines as the width needs
        if len(legend[-1]) + 2 + len(item) > width:
            legend.append(" " * 2)
        legend[-1] += "  " + item
    canvas_height = max(3, height - 5 - len(legend))
    canvas_width = max(8, width - _margin(y_scale, canvas_height) - 2)
    columns = _nearest(_values(first), (np.arange(canvas_width) + 0.5) / canvas_width, x_scale)
    rows = _nearest(_values(second), 1 - (np.arange(canvas_height) + 0.5) / canvas_height,
                    y_scale)
    sampled = grid[np.ix_(columns, rows)].T        # rows of text run along the second axis
    fraction = np.nan_to_num((sampled - low) / span)
    level = np.clip((fraction * len(SHADES)).astype(np.int64), 0, len(SHADES) - 1)
    text_rows = ["".join(SHADES[v] if np.isfinite(z) else " " for v, z in zip(lv, zr))
                 for lv, zr in zip(level, sampled)]
    title = _title(spec) + (f"  ({spec.name})" if spec.heading else "")
    scales = [w for w, on in (("log x", spec.log_x), ("log y", spec.log_y)) if on]
    if scales:
        title += "  · " + ", ".join(scales)
    return _frame(title, axis_label(second), y_scale, text_rows, [""] * canvas_height,
                  _x_ticks(first, x_scale, canvas_width), axis_label(first), legend)
