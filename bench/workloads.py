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


# ---- P6: an 8-body periapsis budget ------------------------------------------------

_PLANETS = [  # J2000 mean elements (Standish, JPL) and Sun/planet mass ratios, as in the tests
    ("venus", 0.72333566, 0.00677672, 3.39467605, 76.67984255, 131.60246718, 408523.71),
    ("earth", 1.00000261, 0.01671123, -0.00001531, 0.0, 102.93768193, 328900.56),
    ("mars", 1.52371034, 0.09339410, 1.84969142, 49.55953891, -23.94362959, 3098708),
    ("jupiter", 5.20288700, 0.04838624, 1.30439695, 100.47390909, 14.72847983, 1047.3486),
    ("saturn", 9.53667594, 0.05386179, 2.48599187, 113.66242448, 92.59887831, 3497.898),
    ("uranus", 19.18916464, 0.04725744, 0.77263783, 74.01692503, 170.95427630, 22902.98),
    ("neptune", 30.06992276, 0.00859048, 1.77004347, 131.78422574, 44.96476227, 19412.24),
]
_MERCURY = (0.38709927, 0.20563593, 7.00497902, 48.33076593, 77.45779628)


def budget_sheet() -> str:
    lines = [f"mercury = orbit({_MERCURY[0]} AU, {_MERCURY[1]}, {_MERCURY[2]} deg, "
             f"{_MERCURY[3]} deg, long_peri = {_MERCURY[4]} deg)"]
    for name, a, e, i, node, lp, ratio in _PLANETS:
        lines.append(f"{name} = orbit({a} AU, {e}, {i} deg, {node} deg, long_peri = {lp} deg, "
                     f"m = 1 Msun / {ratio})")
    names = ", ".join(p[0] for p in _PLANETS)
    lines.append(f"budget = periapsis_budget(1 Msun, mercury, [{names}])")
    return "\n".join(lines) + "\n"


def budget_direct(grid: int = 256):
    """The same secular rates written directly with numpy (no relsheet code)."""
    import numpy as np

    gm_sun = 1.3271244e20
    au = 149_597_870_700.0

    def frame(i, node, w):
        co, so, cw, sw, ci, si = (np.cos(node), np.sin(node), np.cos(w), np.sin(w),
                                  np.cos(i), np.sin(i))
        P = np.array([co * cw - so * sw * ci, so * cw + co * sw * ci, sw * si])
        Q = np.array([-co * sw - so * cw * ci, -so * sw + co * cw * ci, cw * si])
        W = np.array([so * si, -co * si, ci])
        return P, Q, W

    def sample(a, e, i, node, w, n):
        M = 2 * np.pi * (np.arange(n) + 0.5) / n
        E = M.copy() if e < 0.8 else np.full(n, np.pi)
        for _ in range(60):
            step = (E - e * np.sin(E) - M) / (1 - e * np.cos(E))
            E -= step
            if np.max(np.abs(step)) < 1e-15:
                break
        r = a * (1 - e * np.cos(E))
        cf = (np.cos(E) - e) / (1 - e * np.cos(E))
        sf = np.sqrt(1 - e**2) * np.sin(E) / (1 - e * np.cos(E))
        P, Q, W = frame(i, node, w)
        return r, cf, sf, (r * cf)[:, None] * P + (r * sf)[:, None] * Q, P, Q, W

    deg = np.pi / 180
    a, e, i, node, lp = _MERCURY
    a, i, node, w = a * au, i * deg, node * deg, (lp - node) * deg
    r, cf, sf, xt, P, Q, W = sample(a, e, i, node, w, grid)
    radial = cf[:, None] * P + sf[:, None] * Q
    transverse = -sf[:, None] * P + cf[:, None] * Q
    p = a * (1 - e**2)
    h = np.sqrt(gm_sun * p)
    rates = {}
    for name, ap, ep, ip, nodep, lpp, ratio in _PLANETS:
        *_, xp, _, _, _ = sample(ap * au, ep, ip * deg, nodep * deg, (lpp - nodep) * deg, grid)
        d = xp[None, :, :] - xt[:, None, :]
        dist = np.sqrt(np.einsum("tpk,tpk->tp", d, d))
        acc = gm_sun / ratio / grid * np.einsum("tpk,tp->tk", d, dist**-3)
        R = np.einsum("tk,tk->t", acc, radial)
        T = np.einsum("tk,tk->t", acc, transverse)
        N = acc @ W
        su = np.sin(w) * cf + np.cos(w) * sf
        rates[name] = np.mean((-p * cf * R + (p + r) * sf * T) / (h * e)
                              + np.tan(i / 2) * r * su * N / h)
    return rates


# ---- P7: Monte Carlo ----------------------------------------------------------------

_MC_INPUTS = [("m1", 1.35, 0.02, "Msun"), ("m2", 1.25, 0.02, "Msun"), ("a", 1.0, 0.01, "AU"),
              ("ecc", 0.2, 0.01, ""), ("b", 2.0, 0.05, "Rsun")]


def mc_sheet(samples: int | None = None, cells: int = 50) -> str:
    """50 cells fed by 5 uncertain inputs. With ``samples``, the inputs are instead
    deterministic arrays of that many values (the baseline of P7)."""
    lines = []
    for name, value, sigma, unit in _MC_INPUTS:
        if samples is None:
            lines.append(f"{name} = {value} ± {sigma} {unit}".rstrip())
        else:
            lines.append(f"{name} = span({value - sigma} {unit}, {value + sigma} {unit}, {samples})"
                         .replace(" ,", ","))
    derived = [
        "rate{k} = periapsis_rate(m1 + m2, a, ecc)",
        "bend{k} = deflection(m1, b)",
        "period{k} = orbital_period(m1 + m2, a * (1 + {k} / 100))",
        "mix{k} = rate{k} * period{k} in arcsec",
        "speed{k} = orbital_speed(m1, a, a * 1.01)",
        "ratio{k} = bend{k} / (1 arcsec) + ecc^2 * {k}",
        "clock{k} = clock_rate(m2, a, speed{k})",
        "sum{k} = ratio{k} + clock{k} * 1e8 + sqrt(ecc)",
        "decay{k} = orbital_decay_rate(m1, m2, period{k}, ecc)",
    ]
    k = 0
    while len(lines) < cells:
        lines.append(derived[k % len(derived)].format(k=k // len(derived)))
        k += 1
        if k % len(derived) == 0 and len(lines) + len(derived) > cells:
            break
    while len(lines) < cells:
        lines.append(f"extra{len(lines)} = m1 * {len(lines)} + m2")
    return "\n".join(lines) + "\n"


# ---- P9: a 1,000 × 1,000 grid through four steps -----------------------------------------

GRID_SHEET = """\
r = axis(span(0.3 AU, 30 AU, 1000))
el = axis(span(1 deg, 179 deg, 1000))
b = r * sin(el)
w = b * 2 + 3 AU
z = w / 7 s
v = z * z * 1 s
"""


def grid_direct():
    import astropy.units as u
    import numpy as np

    r = u.Quantity(np.linspace(0.3, 30, 1000), u.AU)[:, None]
    el = u.Quantity(np.linspace(1, 179, 1000), u.deg)[None, :]
    b = r * np.sin(el)
    w = b * 2 + 3 * u.AU
    z = w / (7 * u.s)
    v = z * z * (1 * u.s)
    return v


# ---- P11: orbit_state and binary_delays over 1,000,000 dates -------------------------------

DATES = 1_000_000

TIME_SHEET = f"""\
t0 = 2031-04-12 TDB
t = span(t0, t0 + 400 d, {DATES})
planet = orbit(a = 1.4 AU, e = 0.09, i = 2 deg, node = 40 deg, arg_peri = 110 deg, t_peri = 2030-11-02 TDB)
state = orbit_state(1 Msun, planet, t)
T0 = 2030-12-01 TDB
delays = binary_delays(t, 0.322997448918 d, 2.341776 s, 0.6171340, 292.54 deg, T0, 1.438 Msun, 1.390 Msun)
"""


def time_direct():
    """The same computations on float seconds with the library's own numpy kernels (Kepler's
    equation, the two-body state, the timing formula and its inversion), written out without
    dates, units or records."""
    import astropy.constants as c
    import numpy as np

    from calc.physics.functions.motion import solve_kepler, true_from_eccentric, two_body_state

    au = 1.495978707e11
    gm_sun = c.GM_sun.value
    seconds = np.linspace(0.0, 400 * 86400.0, DATES)
    # orbit_state: t − t_peri = seconds + 161 days (2031-04-12 − 2030-11-02)
    a, e = 1.4 * au, 0.09
    i, node, w = np.radians(2.0), np.radians(40.0), np.radians(110.0)
    n = np.sqrt(gm_sun / a**3)
    E = solve_kepler(n * (seconds + 161 * 86400.0), e)
    P = (np.cos(node) * np.cos(w) - np.sin(node) * np.sin(w) * np.cos(i),
         np.sin(node) * np.cos(w) + np.cos(node) * np.sin(w) * np.cos(i), np.sin(w) * np.sin(i))
    Q = (-np.cos(node) * np.sin(w) - np.sin(node) * np.cos(w) * np.cos(i),
         -np.sin(node) * np.sin(w) + np.cos(node) * np.cos(w) * np.cos(i), np.cos(w) * np.sin(i))
    state = two_body_state(gm_sun, a, e, E, P, Q)
    anomaly = true_from_eccentric(E, e)
    # binary_delays: the timing formula, inverted for the pulsar's time as relsheet does
    pb, x, ecc, om = 0.322997448918 * 86400, 2.341776, 0.6171340, np.radians(292.54)
    gamma, r, s, k, pbdot = 4.29e-3, 6.85e-6, 0.734, 4.2e-4, -2.4e-12
    since = seconds + 132 * 86400.0
    root = np.sqrt(1 - ecc * ecc)

    def delays(T):
        phase = T / pb
        Eb = solve_kepler(2 * np.pi * (phase - 0.5 * pbdot * phase * phase), ecc)
        om_t = om + k * true_from_eccentric(Eb, ecc)
        sin_u, cos_u = np.sin(Eb), np.cos(Eb)
        proj = np.sin(om_t) * (cos_u - ecc) + root * np.cos(om_t) * sin_u
        return x * proj, gamma * sin_u, -2 * r * np.log(1 - ecc * cos_u - s * proj)

    T = since
    floor = 1e-12 + 4 * np.finfo(float).eps * np.max(np.abs(since))
    for _ in range(50):
        roemer, einstein, shapiro = delays(T)
        updated = since - (roemer + einstein + shapiro)
        moved = np.max(np.abs(updated - T))
        T = updated
        if not moved > floor:
            break
    return state, anomaly, delays(T)


# ---- P12: Monte Carlo through a two-mass solve ------------------------------------------------

SOLVE_SHEET = """\
Pb = 0.322997448918 d
e = 0.6171340
omdot = 4.226598 ± 0.000005 deg / yr
gam = 4.307 ± 0.004 ms
m1 = 1.4 Msun
m2 = 1.4 Msun
solve periastron_rate(m1, m2, Pb, e) == omdot, einstein_delay_amplitude(m1, m2, Pb, e) == gam for m1, m2
pbdot = orbital_decay_rate(m1, m2, Pb, e)
"""

GIVEN_SHEET = """\
Pb = 0.322997448918 d
e = 0.6171340
omdot = 4.226598 ± 0.000005 deg / yr
gam = 4.307 ± 0.004 ms
m1 = 1.43787 ± 0.00097 Msun
m2 = 1.39050 ± 0.00097 Msun
w = periastron_rate(m1, m2, Pb, e)
g = einstein_delay_amplitude(m1, m2, Pb, e)
pbdot = orbital_decay_rate(m1, m2, Pb, e)
"""


# ---- P10: a 100,000-point line figure ----------------------------------------------------

PLOT_POINTS = 100_000


def plot_sheet(points: int = PLOT_POINTS) -> str:
    """The figure of P10 as a sheet: a delay curve near conjunction against the day."""
    return (f"## Orvane b near conjunction\n"
            f"days = axis(span(-10 d, 10 d, {points}))\n"
            f"delay = 150 us / sqrt((days / 1 d)^2 + 0.3)\n"
            f"plot delay vs days\n")


def plot_spec_script(folder: str, root: str, points: int = PLOT_POINTS) -> str:
    """The figure of P10 drawn through relsheet's writer from numpy data (the same numbers
    the sheet of :func:`plot_sheet` gives), until the engine evaluates `plot` lines; ``root``
    is the checkout whose `calc` is measured."""
    return f"""\
import sys
sys.path.insert(0, {root!r})
import numpy as np
from calc.outputs.figures import PlotSpec, Series
from calc.outputs.plot import write_plots

days = np.linspace(-10, 10, {points})
delay = 150 / np.sqrt(days ** 2 + 0.3)
spec = PlotSpec("delay_vs_days", "Orvane b near conjunction", (Series("delay", "us", delay),),
                (Series("days", "d", days),))
write_plots([spec], {folder!r}, "png")
"""


def plot_direct_script(folder: str, points: int = PLOT_POINTS) -> str:
    """The same figure written directly with matplotlib, as a person would: the same size,
    resolution, labels, title and grid, saved as PNG."""
    return f"""\
import matplotlib
matplotlib.use("Agg")
import matplotlib.pyplot as plt
import numpy as np

days = np.linspace(-10, 10, {points})
delay = 150 / np.sqrt(days ** 2 + 0.3)
fig, ax = plt.subplots(figsize=(8, 5), dpi=150, layout="constrained")
ax.plot(days, delay, linewidth=1.2)
ax.set_xlabel("days [d]")
ax.set_ylabel("delay [us]")
ax.set_title("Orvane b near conjunction")
ax.grid(True, linewidth=0.4, alpha=0.5)
fig.savefig({folder!r} + "/delay_vs_days.png", dpi=150)
"""


# ---- P14: a sheet over a streamed table ----------------------------------------------------

MAP_SAMPLE = "x [AU],y [km / s]\n1.0,30.0\n2.0,20.0\n"

#: four cells over the table's rows (the table cell itself aside)
MAP_SHEET = """\
rows = read_table("sample.csv")
r = rows.x * 1.5
v = rows.y / 3 in m / s
e = v^2 / 2 - 1.327e20 m^3 s^-2 / r in J / kg
t = r / v in d
"""

MAP_CELLS = "e,t"


def write_map_input(path, rows: int) -> None:
    """``rows`` rows of (x in AU, y in km/s), a million at a time."""
    import numpy as np
    import pyarrow as pa
    import pyarrow.parquet as pq

    rng = np.random.default_rng(14)
    schema = pa.schema([("x [AU]", pa.float64()), ("y [km / s]", pa.float64())])
    with pq.ParquetWriter(path, schema) as writer:
        for start in range(0, rows, 1_000_000):
            n = min(1_000_000, rows - start)
            writer.write_table(pa.table({"x [AU]": rng.uniform(0.5, 5, n),
                                         "y [km / s]": rng.uniform(5, 50, n)}, schema=schema),
                               row_group_size=100_000)


def map_script(source: str, output: str, chunk: int) -> str:
    """The baseline of P14: the same arithmetic as MAP_SHEET, by hand, with pyarrow + numpy
    (units converted by hand: AU in m, km/s in m/s, days in s)."""
    return f"""\
import numpy as np, pyarrow as pa, pyarrow.parquet as pq
AU, DAY = 149_597_870_700.0, 86400.0
schema = pa.schema([pa.field("e", pa.float64(), metadata={{b"unit": b"J / kg"}}),
                    pa.field("t", pa.float64(), metadata={{b"unit": b"d"}})])
with pq.ParquetWriter({output!r}, schema) as writer:
    for batch in pq.ParquetFile({source!r}).iter_batches(batch_size={chunk}, use_threads=False):
        x = batch.column(0).to_numpy()
        y = batch.column(1).to_numpy()
        r = x * 1.5 * AU
        v = y / 3 * 1000.0
        e = v**2 / 2 - 1.327e20 / r
        t = r / v / DAY
        writer.write_batch(pa.record_batch([pa.array(e), pa.array(t)], schema=schema))
"""
