"""What moves a periapsis: orbit records, secular planetary perturbations, the budget.

`perturbation_rate` is Gauss's method of secular perturbations: the
perturbing acceleration of one body on another, averaged over the mean
anomalies of both orbits (each body spread along its orbit in proportion to
the time it spends there), fed to Gauss's planetary equations. It is first
order in the perturber's mass and exact in eccentricities and inclinations.
The average is taken on a uniform grid of mean anomalies: the integrand is
smooth and periodic, so the rectangle rule converges geometrically; the
default 256 × 256 grid gives planetary rates to about 1e-10 relative.
"""

from __future__ import annotations

from typing import Annotated

import astropy.units as u
import numpy as np

from ...errors import ArgumentError
from ..records import Record, RecordList
from ..units import century, quantity
from ..validity import warn
from . import args as check
from . import register
from .args import Angle, AngularMomentum, Date, Dimensionless, Length, Mass, Time
from .orbits import (
    j2_rates,
    lense_thirring_rates,
    love_number,
    periapsis_rate,
    rotational_apsidal,
    tidal_apsidal,
)

TOPIC = "orbits"

Orbit = Annotated[Record, "orbit record"]
Orbits = Annotated[RecordList, "orbit records (an array, or one record)"]
Budget = Annotated[Record, "periapsis budget record"]

DEFAULT_GRID = 256
_MAX_GRID_POINTS = 4_000_000
_ARCSEC = np.pi / (180 * 3600)
_CENTURY_S = 36525 * 86400.0
_RATE_UNIT = u.arcsec / century


@register("orbit", TOPIC, samplewise=True)
def orbit(a: Length, e: Dimensionless, i: Angle | None = None, node: Angle | None = None,
          long_peri: Angle | None = None, arg_peri: Angle | None = None,
          m: Mass | None = None, t_peri: Date | None = None,
          mean_anomaly: Angle | None = None, epoch: Date | None = None) -> Orbit:
    """An orbit record: Keplerian elements (and the body's mass, for a perturber).

    Formula:   ϖ = Ω + ω: give the longitude of periapsis ϖ (`long_peri`, as planetary tables
               do) or the argument of periapsis ω (`arg_peri`, as binary and exoplanet papers
               do), not both; the other is derived. Fields: a, e, i, node, arg_peri,
               long_peri, and m when given; read them as `venus.a`.
               Where the body is along its orbit: the time of periapsis `t_peri`, or the
               mean anomaly M0 = `mean_anomaly` at the date `epoch` (one of the two, never
               both); `orbit_state` then finds M = n (t − t_peri) or M0 + n (t − epoch).
               These become fields too (t_peri, or mean_anomaly and epoch). Without them
               the record has no position in time (enough for secular rates).
    Arguments: a  semi-major axis (length);  e  eccentricity (0 ≤ e < 1);
               i  inclination, node  longitude of the ascending node Ω, long_peri  ϖ,
               arg_peri  ω (angles, default 0);  m  the body's mass or GM (for a perturber);
               t_peri  a date;  mean_anomaly  an angle;  epoch  a date
    Result:    an orbit record
    Validity:  osculating or mean elements, as the source gives them; angles in one frame;
               dates are read in TDB by the functions that use them.
    PPN:       none.
    Source:    Murray & Dermott 1999, Solar System Dynamics, §2.8 (from memory: a book not available here).
    """
    check.length(a, "a")
    ecc = check.eccentricity(e)
    angles = {}
    for value, name in ((i, "i"), (node, "node"), (long_peri, "long_peri"), (arg_peri, "arg_peri")):
        if value is not None:
            angles[name] = check.angle(value, name)
    if "long_peri" in angles and "arg_peri" in angles:
        raise ArgumentError("give `long_peri` or `arg_peri`, not both", "arg_peri")
    inc = angles.get("i", 0.0)
    omega_node = angles.get("node", 0.0)
    if "long_peri" in angles:
        omega = angles["long_peri"] - omega_node
    else:
        omega = angles.get("arg_peri", 0.0)
    # fields keep the numbers as written where the unit allows (0.061 AU stays 0.061 AU)
    def degrees(q, radians):
        return quantity(check.value_in(q, u.deg), u.deg) if q is not None else \
            quantity(np.asarray(radians) * 180 / np.pi, u.deg)

    given = {"i": i, "node": node, "long_peri": long_peri, "arg_peri": arg_peri}
    i_deg = degrees(given["i"], inc)
    node_deg = degrees(given["node"], omega_node)
    if long_peri is not None:
        long_deg = degrees(long_peri, 0.0)
        arg_deg = quantity(long_deg.value - node_deg.value, u.deg)
    else:
        arg_deg = degrees(arg_peri, omega)
        long_deg = quantity(node_deg.value + arg_deg.value, u.deg)
    fields = {
        "a": quantity(check.value_in(a, u.AU), u.AU),
        "e": quantity(np.asarray(ecc, dtype=float)),
        "i": i_deg,
        "node": node_deg,
        "arg_peri": arg_deg,
        "long_peri": long_deg,
    }
    if m is not None:
        check.gravitational_parameter(m, "m")
        fields["m"] = m
    # arrays of elements (a sweep over a, say): every element on the same points
    try:
        shape = np.broadcast_shapes(*(np.shape(q.value) for q in fields.values()))
    except ValueError:
        raise ArgumentError("the orbit's elements are arrays of different lengths", "a") from None
    if shape:
        fields = {k: quantity(np.broadcast_to(q.value, shape).copy(), q.unit)
                  for k, q in fields.items()}
    fields.update(_position_in_time(t_peri, mean_anomaly, epoch))
    return Record("orbit", fields)


def _position_in_time(t_peri, mean_anomaly, epoch) -> dict:
    """The fields that place the body on its orbit: t_peri, or mean_anomaly with epoch."""
    if t_peri is not None and (mean_anomaly is not None or epoch is not None):
        extra = "mean_anomaly" if mean_anomaly is not None else "epoch"
        raise ArgumentError(f"give `t_peri`, or `mean_anomaly` with `epoch`, not both "
                            f"(`t_peri` and `{extra}` were given)", extra)
    if t_peri is not None:
        date = check.date(t_peri, "t_peri")
        if date.ndim:
            raise ArgumentError("`t_peri` must be a single date, not an array", "t_peri")
        return {"t_peri": date}
    if mean_anomaly is None and epoch is None:
        return {}
    if mean_anomaly is None or epoch is None:
        missing, given = ("epoch", "mean_anomaly") if epoch is None else \
            ("mean_anomaly", "epoch")
        raise ArgumentError(f"`{given}` needs `{missing}`: the mean anomaly holds at that date",
                            given)
    check.scalar(mean_anomaly, "mean_anomaly")
    anomaly = check.angle(mean_anomaly, "mean_anomaly")
    date = check.date(epoch, "epoch")
    if date.ndim:
        raise ArgumentError("`epoch` must be a single date, not an array", "epoch")
    return {"mean_anomaly": quantity(anomaly * 180 / np.pi, u.deg), "epoch": date}


class _Elements:
    """An orbit record's elements in SI and radians."""

    def __init__(self, record, name: str) -> None:
        if not isinstance(record, Record) or record.kind != "orbit":
            raise ArgumentError(f"`{name}` must be an orbit record, made with orbit(…)", name)
        f = record.fields
        self.a = f["a"].to_value(u.m)
        self.e = float(f["e"].value)
        self.i = f["i"].to_value(u.rad)
        self.node = f["node"].to_value(u.rad)
        self.arg = f["arg_peri"].to_value(u.rad)
        self.mass = f.get("m")
        self.label = record.label

    def gm(self, name: str, required: bool):
        if self.mass is None:
            if required:
                raise ArgumentError(f"`{name}` needs the body's mass: orbit(…, m = …)", name)
            return 0.0
        return check.gravitational_parameter(self.mass, name)

    def frame(self):
        """The perifocal unit vectors P, Q, W in the reference frame."""
        co, so = np.cos(self.node), np.sin(self.node)
        cw, sw = np.cos(self.arg), np.sin(self.arg)
        ci, si = np.cos(self.i), np.sin(self.i)
        P = np.array([co * cw - so * sw * ci, so * cw + co * sw * ci, sw * si])
        Q = np.array([-co * sw - so * cw * ci, -so * sw + co * cw * ci, cw * si])
        W = np.array([so * si, -co * si, ci])
        return P, Q, W

    def sample(self, n: int):
        """(r, cos f, sin f, positions) at n mean anomalies spaced evenly over one orbit."""
        mean_anomaly = 2 * np.pi * (np.arange(n) + 0.5) / n
        E = eccentric_anomaly(mean_anomaly, self.e)
        cos_e, sin_e = np.cos(E), np.sin(E)
        r = self.a * (1 - self.e * cos_e)
        cos_f = (cos_e - self.e) / (1 - self.e * cos_e)
        sin_f = np.sqrt(1 - self.e**2) * sin_e / (1 - self.e * cos_e)
        P, Q, _ = self.frame()
        positions = (r * cos_f)[:, None] * P + (r * sin_f)[:, None] * Q
        return r, cos_f, sin_f, positions


def eccentric_anomaly(mean_anomaly, e: float):
    """Solve Kepler's equation E − e sin E = M (vectorised Newton iteration)."""
    E = np.where(e < 0.8, mean_anomaly, np.pi) + 0.0 * mean_anomaly
    for _ in range(60):
        step = (E - e * np.sin(E) - mean_anomaly) / (1 - e * np.cos(E))
        E = E - step
        if np.max(np.abs(step)) < 1e-15:
            break
    return E


def _grid(grid) -> tuple[int, int]:
    if grid is None:
        return DEFAULT_GRID, DEFAULT_GRID
    values = np.atleast_1d(check.dimensionless(grid, "grid"))
    if values.size not in (1, 2) or np.any(values != np.round(values)) or np.any(values < 16):
        raise ArgumentError("`grid` must be a whole number of points (at least 16), or two: "
                            "[target, perturber]", "grid")
    n_target, n_perturber = (int(values[0]),) * 2 if values.size == 1 else map(int, values)
    if n_target * n_perturber > _MAX_GRID_POINTS:
        raise ArgumentError(f"`grid` of {n_target} × {n_perturber} points is above the limit of "
                            f"{_MAX_GRID_POINTS:,}", "grid")
    return n_target, n_perturber


class _TargetSample:
    """The target's orbit sampled once, with its radial and transverse directions."""

    def __init__(self, target: _Elements, n: int) -> None:
        self.elements = target
        self.r, self.cos_f, self.sin_f, self.positions = target.sample(n)
        P, Q, self.normal = target.frame()
        self.radial = self.cos_f[:, None] * P + self.sin_f[:, None] * Q
        self.transverse = -self.sin_f[:, None] * P + self.cos_f[:, None] * Q


def _secular_rate(gm_central, sampled: _TargetSample, perturber: _Elements, gm_perturber,
                  n_p: int) -> float:
    """dϖ/dt of the target in rad/s, Gauss's method (see the module docstring)."""
    target = sampled.elements
    mu = gm_central + target.gm("target", required=False)
    r, cos_f, sin_f, x_t = sampled.r, sampled.cos_f, sampled.sin_f, sampled.positions
    _, _, _, x_p = perturber.sample(n_p)
    radial, transverse, W = sampled.radial, sampled.transverse, sampled.normal
    # direct term of the perturbing acceleration, averaged over the perturber's orbit; the
    # indirect term (the perturber's pull on the Sun) averages to zero over its period
    d = x_p[None, :, :] - x_t[:, None, :]
    squared = np.einsum("tpk,tpk->tp", d, d)
    dist = np.sqrt(squared)
    closest = dist.min()
    if closest < 0.05 * target.a:
        warn(f"the orbits of the target and `{perturber.label or 'a perturber'}` come within "
             f"{closest / target.a:.2g} a: the averaged rate converges slowly there and "
             "first-order secular theory may not apply")
    # Σ_p d / |d|³ at each target point: 1 / (|d|² |d|) costs a twentieth of |d|**-3 (a
    # general power; computed in place, as fresh large arrays cost page faults), and the sum
    # over p is a matrix product per target point
    weight = np.multiply(squared, dist, out=squared)
    np.divide(1.0, weight, out=weight)
    acc = gm_perturber / n_p * np.matmul(weight[:, None, :], d)[:, 0, :]
    R = np.einsum("tk,tk->t", acc, radial)
    T = np.einsum("tk,tk->t", acc, transverse)
    N = acc @ W
    e, a = target.e, target.a
    p = a * (1 - e**2)
    h = np.sqrt(mu * p)
    cos_w, sin_w = np.cos(target.arg), np.sin(target.arg)
    sin_u = sin_w * cos_f + cos_w * sin_f
    # Gauss: dω/dt + dΩ/dt, with (1 − cos i)/sin i written as tan(i/2)
    in_plane = (-p * cos_f * R + (p + r) * sin_f * T) / (h * e)
    out_of_plane = np.tan(target.i / 2) * r * sin_u * N / h
    return float(np.mean(in_plane + out_of_plane))


def _target_elements(target) -> _Elements:
    elements = _Elements(target, "target")
    if elements.e < 1e-6:
        raise ArgumentError("the target's orbit is circular (e < 1e-6): its periapsis is not "
                            "defined", "target")
    return elements


@register("perturbation_rate", TOPIC, samplewise=True)
def perturbation_rate(M: Mass, target: Orbit, perturber: Orbit,
                      grid: Dimensionless | None = None) -> Annotated[u.Quantity, "angle per time"]:
    """Secular rate of the target's longitude of periapsis caused by one perturbing body.

    Formula:   Gauss's planetary equations with the perturbing acceleration F = (R, T, N)
               averaged over both mean anomalies (Gauss's method of secular perturbations):
               dϖ/dt = ⟨ [−p cos f R + (p + r) sin f T] / (h e) + tan(i/2) r sin(ω + f) N / h ⟩,
               p = a (1 − e²), h = √(G (M + m) p), F from G m_p (r_p − r) / |r_p − r|³
    Arguments: M  mass or GM of the central body;  target, perturber  orbit records (the
               perturber with its mass m);  grid  mean anomalies per orbit (default 256, or
               [target, perturber])
    Result:    angle per time, in arcsec / century
    Validity:  first order in the perturber's mass, exact in eccentricities and inclinations;
               secular (no mean-motion resonances, no short-period terms); orbits that cross or
               nearly touch get a warning. Both orbits in the same reference frame.
    PPN:       none (Newtonian).
    Source:    Gauss 1818 (Werke III, 331); Murray & Dermott 1999, Solar System Dynamics,
               §2.9 (Gauss's equations) and §7.2; Burns 1976, Am. J. Phys. 44, 944 (from memory:
               not reachable here; checked in the tests against Laplace–Lagrange theory).
    """
    gm = check.gravitational_parameter(M)
    tgt = _target_elements(target)
    pert = _Elements(perturber, "perturber")
    n_t, n_p = _grid(grid)
    rate = _secular_rate(gm, _TargetSample(tgt, n_t), pert, pert.gm("perturber", required=True),
                         n_p)
    return quantity(rate * _CENTURY_S / _ARCSEC, _RATE_UNIT)


#: Field names of the budget's own terms, which a perturber's cell name may not take.
_TERM_FIELDS = ("oblateness", "gr", "lense_thirring", "tides", "rotation", "total")
#: A perturber this close to inclination 0 suggests elements in its own orbit's frame.
_FLAT = 0.01 * np.pi / 180


def _names(records: list[Record]) -> list[str]:
    names: list[str] = []
    for index, record in enumerate(records, start=1):
        name = record.label or f"perturber_{index}"
        if name in names or name in _TERM_FIELDS:
            name = f"perturber_{index}"
        names.append(name)
    return names


def _warn_if_ecliptic(target: _Elements, perturbers: list[_Elements]) -> None:
    """J2 and Lense–Thirring need the inclination to the central body's equator."""
    if target.i == 0:
        reason = "the target's inclination is 0 (given so, or left out)"
    elif any(abs(p.i) < _FLAT for p in perturbers):
        reason = "a perturber's orbit lies in the reference plane (i < 0.01°), as in an " \
                 "ecliptic frame"
    else:
        return
    warn(f"the oblateness and Lense–Thirring terms use the target's inclination to the central "
         f"body's equator, but {reason}: give the target's `i` from that equator")


@register("periapsis_budget", TOPIC, samplewise=True)
def periapsis_budget(M: Mass, target: Orbit, perturbers: Orbits, J2: Dimensionless | None = None,
                     R: Length | None = None, J: AngularMomentum | None = None,
                     gamma: Dimensionless | None = None, beta: Dimensionless | None = None,
                     grid: Dimensionless | None = None, k2: Dimensionless | None = None,
                     R_planet: Length | None = None, P_rot: Time | None = None) -> Budget:
    """Everything that moves a periapsis, term by term: perturbers, J2, GR, Lense–Thirring, tides.

    Formula:   one field per perturber (`perturbation_rate`, named after the cell holding its
               orbit), `oblateness` (`oblateness_rate`, when J2 and R are given), `gr`
               (`periapsis_rate`, with the sheet's PPN values), `lense_thirring`
               ((1 + γ)/2 · 2 G J (1 − 3 cos i) / (c² a³ (1 − e²)^(3/2)), when J is given),
               `tides` (`tidal_apsidal_rate` of the target planet, when k2 and R_planet are
               given), `rotation` (`rotational_apsidal_rate`, when P_rot is given too) and
               `total`
    Arguments: M  central mass or GM;  target  orbit record (with its mass m for tides);
               perturbers  an array of orbit records with masses;  J2, R  the central body's
               oblateness and its reference radius;  J  its spin angular momentum;
               gamma, beta  PPN (default: sheet, else 1);  grid  as for perturbation_rate;
               k2, R_planet, P_rot  the target planet's tidal Love number, radius and rotation
               period
    Result:    a periapsis budget record, every field in arcsec / century, all rates of the
               longitude of periapsis
    Validity:  each term's own (first order in each small parameter, secular); the terms add
               to first order. The oblateness and Lense–Thirring terms take the target's
               inclination as measured from the central body's equator, not from the
               ecliptic: the budget warns when the elements look ecliptic (the target at
               i = 0, or a perturber at i < 0.01°). Tides and rotation take the planet's spin
               along its orbit normal.
    PPN:       `gr` carries (2 + 2γ − β)/3 and `lense_thirring` (1 + γ)/2; the others none.
    Source:    each term's function (see their entries); Clemence 1947, Rev. Mod. Phys. 19,
               361 (Mercury: 531.5″/century from the planets; from memory, not reachable here).
    """
    gm = check.gravitational_parameter(M)
    tgt = _target_elements(target)
    items = [perturbers] if isinstance(perturbers, Record) else list(getattr(perturbers, "items", []))
    if not isinstance(perturbers, (Record, RecordList)):
        raise ArgumentError("`perturbers` must be an array of orbit records, such as "
                            "[venus, earth]", "perturbers")
    n_t, n_p = _grid(grid)
    sampled = _TargetSample(tgt, n_t)
    fields: dict[str, u.Quantity] = {}
    total = 0.0

    def add(name: str, rate) -> None:
        nonlocal total
        fields[name] = quantity(rate * _CENTURY_S / _ARCSEC, _RATE_UNIT)
        total += rate

    elements = [_Elements(record, "perturbers") for record in items]
    for name, pert in zip(_names(items), elements):
        add(name, _secular_rate(gm, sampled, pert, pert.gm("perturbers", required=True), n_p))
    if (J2 is None) != (R is None):
        raise ArgumentError("give both `J2` and `R` for the oblateness term", "J2" if R is None else "R")
    if J2 is not None or J is not None:
        _warn_if_ecliptic(tgt, elements)
    if J2 is not None:
        node, argument = j2_rates(gm, check.dimensionless(J2, "J2"), check.length(R, "R"),
                                  tgt.a, tgt.e, tgt.i)
        add("oblateness", node + argument)
    gr = periapsis_rate(M, target.fields["a"], target.fields["e"], gamma, beta)
    add("gr", gr.to_value(_RATE_UNIT) * _ARCSEC / _CENTURY_S)
    if J is not None:
        G = check.active("G").to_value(u.m**3 / (u.kg * u.s**2))
        node, argument = lense_thirring_rates(G, check.angular_momentum(J),
                                              check.speed_of_light(), tgt.a, tgt.e, tgt.i,
                                              check.ppn(gamma, "gamma"))
        add("lense_thirring", node + argument)
    if (k2 is None) != (R_planet is None):
        raise ArgumentError("give both `k2` and `R_planet` for the tidal term",
                            "k2" if R_planet is None else "R_planet")
    if P_rot is not None and k2 is None:
        raise ArgumentError("`P_rot` needs `k2` and `R_planet` too: the rotational bulge's size "
                            "depends on them", "P_rot")
    if k2 is not None:
        gm_planet = tgt.gm("target", required=True)
        love = love_number(k2)
        radius = check.length(R_planet, "R_planet")
        if tgt.a * (1 - tgt.e) <= radius:
            raise ArgumentError("the target's periapsis lies inside `R_planet`", "R_planet")
        add("tides", tidal_apsidal(gm, gm_planet, radius, love, tgt.a, tgt.e))
        if P_rot is not None:
            add("rotation", rotational_apsidal(gm, gm_planet, radius, love,
                                               check.duration(P_rot, "P_rot"), tgt.a, tgt.e))
    fields["total"] = quantity(total * _CENTURY_S / _ARCSEC, _RATE_UNIT)
    return Record("periapsis budget", fields)
