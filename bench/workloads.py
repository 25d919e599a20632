"""Generated workloads for the benchmarks: a large sheet and its hand-written astropy twin."""

from __future__ import annotations


def size_sheet(n: int = 2000) -> str:
    """``n`` cells: a chain of length arithmetic, with a Kepler period every tenth cell."""
    lines = ["## generated length chain", "c0 = 1 AU"]
    last_length = "c0"
    for i in range(1, n):
        if i % 10 == 0:
            lines.append(f"c{i} = 2 pi sqrt({last_length}^3 / const.GM_sun) in d")
        else:
            lines.append(f"c{i} = {last_length} * 1.0001 + 1500 km")
            last_length = f"c{i}"
    return "\n".join(lines) + "\n"


def size_script(n: int = 2000) -> str:
    """The same arithmetic as :func:`size_sheet`, written directly with astropy."""
    lines = ["import numpy as np", "import astropy.units as u", "import astropy.constants as const",
             "c0 = 1 * u.AU"]
    last_length = "c0"
    for i in range(1, n):
        if i % 10 == 0:
            lines.append(f"c{i} = (2 * np.pi * np.sqrt({last_length}**3 / const.GM_sun)).to(u.d)")
        else:
            lines.append(f"c{i} = {last_length} * 1.0001 + 1500 * u.km")
            last_length = f"c{i}"
    return "\n".join(lines) + "\n"


def fanout_sheet(n: int = 2000, fed: int = 20) -> str:
    """``n`` cells of which ``fed`` (1% of 2000) depend on the input ``x0``."""
    lines = ["x0 = 1 km", "y0 = 1 km"]
    lines += [f"x{i} = x{i - 1} * 1.001 + 1 m" for i in range(1, fed)]
    lines += [f"y{i} = y{i - 1} * 1.001 + 1 m" for i in range(1, n - fed)]
    return "\n".join(lines) + "\n"


ARRAY_SHEET = """\
x = span(0 km, 1000 km, 1000000)
y = x * 2 + 3 km
z = y / 7 s
w = z * z * 1 s
"""


def array_direct():
    import astropy.units as u
    import numpy as np

    x = u.Quantity(np.linspace(0, 1000, 1_000_000), u.km)
    y = x * 2 + 3 * u.km
    z = y / (7 * u.s)
    w = z * z * (1 * u.s)
    return w
