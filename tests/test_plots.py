"""calc.outputs.plot: figure files read back, the terminal drawing decoded, the commands.

PNG files are decoded with matplotlib.image.imread, SVG parsed with xml.etree (SVG 1.1: text
in <text>, a polyline as the path data's `M`/`L` commands), PDF checked against ISO 32000-1
(`%PDF-` header, `%%EOF` trailer, one `/Type /Page` object per page, `/MediaBox` in points of
1/72 inch). Braille dots are decoded by the Unicode Braille Patterns block (U+2800 + one bit
per dot: dots 1-3 down the left column are bits 0-2, dots 4-6 down the right bits 3-5, dots
7 and 8 at the bottom bits 6 and 7).
"""

from __future__ import annotations

import re
import subprocess
import sys
import xml.etree.ElementTree as ET
from pathlib import Path

import numpy as np
import pytest

from calc import Sheet
from calc.errors import SheetError
from calc.interfaces.cli import main
from calc.interfaces.repl import Session
from calc.outputs.figures import PlotSpec, Series
from calc.outputs.plot import (
    SHADES,
    PlotError,
    draw,
    figure_bytes,
    render_terminal,
    write_plot,
    write_plots,
)

ROOT = Path(__file__).resolve().parent.parent
SVG = "{http://www.w3.org/2000/svg}"

N = 41
DAYS = np.linspace(-10, 10, N)
# a zigzag: every sample is a corner, so no drawing program may merge two segments
ZIGZAG = 100 + 20 * (-1.0) ** np.arange(N) + DAYS


def line_spec(sigma: bool = True) -> PlotSpec:
    delay = Series("delay", "us", ZIGZAG, sigma=np.full(N, 3.0) if sigma else None)
    later = Series("delay_later", "us", 80 + DAYS ** 2)
    return PlotSpec("delay_vs_days", "Orvane b near conjunction", (delay, later),
                    (Series("days", "d", DAYS),))


def map_spec() -> PlotSpec:
    elong = np.linspace(1, 179, 30)
    r_obs = np.logspace(-0.5, 1.5, 12)
    shift = np.outer(elong, np.ones_like(r_obs))   # grows along the first axis only
    return PlotSpec("shift_map", "Deflection over the sky", (Series("shift", "mas", shift),),
                    (Series("elong", "deg", elong), Series("r_obs", "AU", r_obs)), log_y=True)


def date_spec() -> PlotSpec:
    start = np.datetime64("2031-04-12T06:30")
    texts = tuple(f"{start + np.timedelta64(6 * i, 'h')}:00 TDB" for i in range(40))
    return PlotSpec("rate_vs_t", "", (Series("rate", "ns / d", np.sin(np.arange(40) / 5)),),
                    (Series("t", "d", np.arange(40) / 4, texts=texts),))


# ---- files ------------------------------------------------------------------------------


def test_png_decodes_to_the_figure_size(tmp_path):
    from matplotlib.image import imread

    (path,) = write_plots([line_spec()], tmp_path, "png")
    assert path == tmp_path / "delay_vs_days.png"
    pixels = imread(path)
    assert pixels.shape[:2] == (750, 1200)        # 8 × 5 inches at 150 dots per inch
    flat = pixels.reshape(-1, pixels.shape[2])
    assert len(np.unique(flat, axis=0)) > 50      # drawn, not one colour
    assert sorted(p.name for p in tmp_path.iterdir()) == ["delay_vs_days.png"]   # no leftovers


def _svg(spec: PlotSpec) -> ET.Element:
    return ET.fromstring(figure_bytes(spec, "svg"))


def _texts(root: ET.Element) -> list[str]:
    return ["".join(t.itertext()).strip() for t in root.iter(f"{SVG}text")]


def _group(root: ET.Element, gid: str) -> ET.Element | None:
    return next((g for g in root.iter(f"{SVG}g") if g.get("id") == gid), None)


def _points(group: ET.Element) -> int:
    (path,) = [p for p in group.iter(f"{SVG}path")]
    return len(re.findall(r"[ML]\s*-?[\d.]+", path.get("d")))


def test_svg_labels_title_and_every_point():
    root = _svg(line_spec())
    texts = _texts(root)
    assert "days [d]" in texts
    assert "delay, delay_later [us]" in texts     # two lines in one unit share the axis
    assert "Orvane b near conjunction" in texts
    assert {"delay", "delay_later"} <= set(texts)  # the legend
    assert _points(_group(root, "line-delay")) == N
    assert _points(_group(root, "line-delay_later")) == N


@pytest.mark.parametrize("sigma, band", [(True, True), (False, False)])
def test_svg_sigma_band_only_where_sigma_is_given(sigma, band):
    root = _svg(line_spec(sigma))
    assert (_group(root, "band-delay") is not None) == band
    assert _group(root, "band-delay_later") is None


def test_svg_map_has_mesh_colour_scale_and_labels():
    root = _svg(map_spec())
    texts = _texts(root)
    assert {"elong [deg]", "r_obs [AU]", "shift [mas]", "Deflection over the sky"} <= set(texts)
    assert _group(root, "map-shift") is not None


def test_map_cells_sit_at_their_axis_values():
    """Each coloured cell of the map is centred on the (x, x2) its value belongs to."""
    elong = np.linspace(1, 179, 7)
    r_obs = np.array([0.5, 1.0, 4.0, 9.0])
    grid = elong[:, None] * 1000 + r_obs[None, :]           # tells both axes apart
    spec = PlotSpec("m", "", (Series("z", "", grid),),
                    (Series("elong", "deg", elong), Series("r_obs", "AU", r_obs)))
    (mesh,) = draw(spec).axes[0].collections
    corners = mesh.get_coordinates()                        # (rows + 1, columns + 1, 2)
    centres = (corners[:-1, :-1] + corners[1:, 1:]) / 2
    values = np.asarray(mesh.get_array()).reshape(centres.shape[:2])
    for (cx, cy), value in zip(centres.reshape(-1, 2), values.ravel()):
        i = int(np.argmin(np.abs(elong - cx)))
        j = int(np.argmin(np.abs(r_obs - cy)))
        assert value == grid[i, j]


def test_pdf_one_page_of_the_figure_size(tmp_path):
    path = write_plot(line_spec(), tmp_path / "f.pdf")
    data = path.read_bytes()
    assert data.startswith(b"%PDF-1.") and data.rstrip().endswith(b"%%EOF")
    assert len(re.findall(rb"/Type\s*/Page\b(?!s)", data)) == 1
    box = re.search(rb"/MediaBox\s*\[\s*0\s+0\s+([\d.]+)\s+([\d.]+)\s*\]", data)
    assert (float(box.group(1)), float(box.group(2))) == (576.0, 360.0)   # 8 × 5 in × 72


def test_same_spec_same_bytes():
    assert figure_bytes(line_spec(), "svg") == figure_bytes(line_spec(), "svg")
    assert figure_bytes(line_spec(), "pdf") == figure_bytes(line_spec(), "pdf")


@pytest.mark.parametrize("log_x, log_y", [(False, False), (True, False), (False, True),
                                          (True, True)])
def test_log_axes(log_x, log_y):
    x = np.logspace(0, 3, 20)
    spec = PlotSpec("p", "", (Series("y", "m", x ** 2),), (Series("x", "s", x),), log_x, log_y)
    axes = draw(spec).axes[0]
    assert axes.get_xscale() == ("log" if log_x else "linear")
    assert axes.get_yscale() == ("log" if log_y else "linear")


def test_dates_on_x_are_dates():
    from matplotlib.dates import num2date

    axes = draw(date_spec()).axes[0]
    first = axes.lines[0].get_xdata()[0]
    assert first == np.datetime64("2031-04-12T06:30")
    assert axes.get_xlabel() == "t (TDB)"
    left, right = axes.get_xlim()
    assert num2date(left).year == num2date(right).year == 2031   # the axis is in dates
    texts = _texts(_svg(date_spec()))
    assert any("2031" in t for t in texts)        # the year is written once, by the ticks


@pytest.mark.parametrize("fmt", ["gif", "", "PNG"])
def test_unknown_format_refused(tmp_path, fmt):
    with pytest.raises(PlotError, match="png, svg, pdf"):
        write_plots([line_spec()], tmp_path, fmt)


def test_file_name_from_the_spec_name(tmp_path):
    spec = PlotSpec("a/b c", "", line_spec().y, line_spec().x)
    (path,) = write_plots([spec], tmp_path / "new", "svg")
    assert path == tmp_path / "new" / "a_b_c.svg" and path.exists()


def test_matplotlib_is_not_loaded_at_start_up():
    code = ("import sys, calc.interfaces.cli, calc.outputs.plot, calc.outputs.tables\n"
            "from calc.interfaces.cli import main\n"
            f"main(['eval', {str(ROOT / 'sheets_demo' / 'orvane_b.sheet')!r}])\n"
            "sys.stderr.write(str(sorted(m for m in sys.modules if m.startswith('matplotlib'))))")
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          cwd=ROOT)
    assert done.stderr.strip().endswith("[]"), done.stderr[-500:]


# ---- the terminal -----------------------------------------------------------------------

_BITS = {0x01: (0, 0), 0x02: (0, 1), 0x04: (0, 2), 0x08: (1, 0), 0x10: (1, 1), 0x20: (1, 2),
         0x40: (0, 3), 0x80: (1, 3)}


def _dots(text: str) -> tuple[set[tuple[int, int]], int, int]:
    """The lit dots (x, y from the top-left) of the braille rows of a drawing."""
    rows = [line[line.index("┤") + 1 if "┤" in line else line.index("│") + 1:]
            for line in text.splitlines() if ("┤" in line or "│" in line)]
    rows = ["".join(ch for ch in row if 0x2800 <= ord(ch) <= 0x28FF) for row in rows]
    dots = set()
    for r, row in enumerate(rows):
        for c, ch in enumerate(row):
            for bit, (dx, dy) in _BITS.items():
                if (ord(ch) - 0x2800) & bit:
                    dots.add((2 * c + dx, 4 * r + dy))
    return dots, 2 * len(rows[0]), 4 * len(rows)


def test_terminal_line_follows_the_data():
    x = np.linspace(0, 1, 500)
    spec = PlotSpec("rise", "", (Series("y", "m", x),), (Series("x", "s", x),))
    text = render_terminal(spec, width=60, height=16)
    dots, width, height = _dots(text)
    assert len(text.splitlines()) == 16
    columns = {}
    for px, py in dots:
        columns.setdefault(px, []).append(py)
    assert sorted(columns) == list(range(width))           # unbroken, edge to edge
    for px, rows in columns.items():                       # on the diagonal y = x
        expected = (1 - px / (width - 1)) * (height - 1)
        assert all(abs(py - expected) <= 1.5 for py in rows), (px, rows, expected)


def test_terminal_frame_labels_and_ranges():
    text = render_terminal(line_spec(), width=72, height=18)
    lines = text.splitlines()
    assert lines[0] == "Orvane b near conjunction  (delay_vs_days)"
    assert lines[1].strip() == "delay, delay_later [us]"
    assert lines[-1] == "dotted: ±1σ"
    assert lines[-2].strip() == "days [d]"
    assert lines[-3].split()[0] == "-10" and lines[-3].split()[-1] == "10"
    assert len(lines) == 18 and max(len(line) for line in lines) <= 72
    ticks = [line for line in lines if "┤" in line]
    top, bottom = float(ticks[0].split("┤")[0]), float(ticks[-1].split("┤")[0])
    # the range holds every line and band: delay_later's 80 + 10² at the top (above the
    # zigzag's band, 130 + 3); the zigzag's lowest corner 80 - 9.5, less σ = 3, at the bottom
    assert top == pytest.approx(180, rel=1e-3)
    assert bottom == pytest.approx(67.5, rel=1e-3)
    # two lines: each named where it ends
    assert sum("╴delay_later" in line for line in lines) == 1
    assert sum(line.rstrip().endswith("╴delay") for line in lines) == 1


def test_terminal_log_y_ticks():
    x = np.linspace(0, 3, 50)
    spec = PlotSpec("p", "", (Series("y", "", 10 ** x),), (Series("x", "", x),), log_y=True)
    lines = render_terminal(spec, 50, 14).splitlines()     # a canvas of 9 rows: a middle one
    ticks = [line.split("┤")[0].strip() for line in lines if "┤" in line]
    assert ticks == ["1000", "31.62", "1"]                 # the middle of 1…1000 in log


def test_terminal_map_shades_grow_with_the_value():
    text = render_terminal(map_spec(), width=52, height=16)
    rows = [line.split("┤" if "┤" in line else "│")[1] for line in text.splitlines()
            if "┤" in line or "│" in line]
    rows = [r for r in rows if set(r) <= set(SHADES)]
    assert len(text.splitlines()) == 16 and max(len(line) for line in text.splitlines()) <= 52
    assert len(rows) == 16 - 5 - 2 and len({len(r) for r in rows}) == 1   # a 2-line scale
    for row in rows:                                       # the value grows left to right
        levels = [SHADES.index(ch) for ch in row]
        assert levels == sorted(levels) and levels[0] == 0 and levels[-1] == len(SHADES) - 1
    legend = "\n".join(text.splitlines()[-2:])
    assert legend.startswith("shift [mas]:  ░ 1…45.5  ▒ 45.5…90")   # 1…179 in four steps
    assert legend.endswith("█ 134.5…179")


def test_terminal_dates_as_written():
    lines = render_terminal(date_spec(), 80, 16).splitlines()
    assert lines[-2].strip().startswith("2031-04-12T06:30:00 TDB")
    assert lines[-2].strip().endswith("2031-04-22T00:30:00 TDB")   # 39 steps of 6 h later
    assert lines[-1].strip() == "t (TDB)"


# ---- the commands -----------------------------------------------------------------------


@pytest.fixture
def with_plots(monkeypatch, tmp_path):
    """A sheet file, and an engine that gives it two plots (the engine side lands apart)."""
    monkeypatch.setattr(Sheet, "plots", lambda self: [line_spec(), map_spec()], raising=False)
    path = tmp_path / "s.sheet"
    path.write_text("x = 1 km\n")
    return path


def test_cli_plot_writes_each_figure(with_plots, tmp_path, capsys):
    out = tmp_path / "figs"
    assert main(["plot", str(with_plots), "-o", str(out), "--format", "svg"]) == 0
    assert capsys.readouterr().out.split() == [str(out / "delay_vs_days.svg"),
                                               str(out / "shift_map.svg")]
    assert ET.parse(out / "shift_map.svg").getroot().tag == f"{SVG}svg"


def test_cli_plot_by_name_and_unknown_name(with_plots, tmp_path, capsys):
    assert main(["plot", str(with_plots), "shift_map", "-o", str(tmp_path)]) == 0
    assert (tmp_path / "shift_map.png").exists() and not (tmp_path / "delay_vs_days.png").exists()
    assert main(["plot", str(with_plots), "shift_mop"]) == 64
    assert "did you mean `shift_map`?" in capsys.readouterr().err
    # names after the options too
    later = tmp_path / "later"
    assert main(["plot", str(with_plots), "-o", str(later), "delay_vs_days"]) == 0
    assert [p.name for p in later.iterdir()] == ["delay_vs_days.png"]
    assert main(["plot", str(with_plots), "-o", str(later), "delay_vs_days", "--bogus"]) == 64
    assert "unrecognized arguments" in capsys.readouterr().err


def test_cli_export_with_plots(with_plots, tmp_path):
    assert main(["export", str(with_plots), "--to", "md", "-o", str(tmp_path / "r.md"),
                 "--plots", str(tmp_path / "p"), "--plot-format", "pdf"]) == 0
    assert sorted(p.name for p in (tmp_path / "p").iterdir()) == ["delay_vs_days.pdf",
                                                                  "shift_map.pdf"]


def test_cli_plot_without_plots(tmp_path, capsys):
    path = tmp_path / "s.sheet"
    path.write_text("x = 1 km\n")
    assert main(["plot", str(path), "-o", str(tmp_path)]) == 0
    assert "no plots to draw" in capsys.readouterr().err


def test_repl_plot_draws_lists_and_saves(with_plots, tmp_path):
    session = Session(with_plots)
    assert session.handle(":plot") == "plots: delay_vs_days, shift_map (:plot NAME draws one)"
    drawing = session.handle(":plot delay_vs_days")
    assert any(0x2800 < ord(ch) <= 0x28FF for ch in drawing)
    assert drawing.splitlines()[-1].startswith(":plot delay_vs_days save delay_vs_days.png") \
        or "save delay_vs_days.png" in drawing.splitlines()[-1]
    target = tmp_path / "out.svg"
    assert session.handle(f":plot shift_map save {target}") == f"saved {target}"
    assert "shift [mas]" in _texts(ET.parse(target).getroot())


@pytest.mark.parametrize("line, message", [
    (":plot nothing", "no plot `nothing`"),
    (":plot shift_map save x.gif", "figures are written as png, svg, pdf"),
    (":plot shift_map keep x.png", ":plot takes a plot name"),
])
def test_repl_plot_mistakes_are_messages(with_plots, line, message):
    assert message in Session(with_plots).handle(line)


def test_plot_error_is_a_sheet_error():
    assert issubclass(PlotError, SheetError)


def test_lines_on_one_y_axis_share_its_unit():
    """`plot a, b vs t` with a in km and b in m draws b in km (1 km = 1000 m, SI); a line of
    another kind of quantity cannot share the axis and is refused at its name."""
    s = Sheet.from_text("t = span(0 d, 10 d, 11)\na = t * 1 km / d\nb = t * 300 m / d\n"
                        "c = t * 2 s / d\nplot a, b vs t\nplot a, c vs t\n")
    (spec,) = s.plots()
    assert [y.unit for y in spec.y] == ["km", "km"]
    np.testing.assert_allclose(spec.y[1].values, np.arange(11) * 0.3)
    (error,) = s.figure_errors()
    assert error.message == "`c` is `s` (time) and `a` `km` (length): one y axis cannot show both"
    assert (error.span.line, error.span.column) == (6, 9)
