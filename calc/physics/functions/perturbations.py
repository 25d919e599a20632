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
from .args import Angle, AngularMomentum, Dimensionless, Length, Mass
from .orbits import j2_rates

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
          m: Mass | None = None) -> Orbit:
    """An orbit record: Keplerian elements (and the body's mass, for a perturber).

    Formula:   ϖ = Ω + ω: give the longitude of periapsis ϖ (`long_peri`, as planetary tables
               do) or the argument of periapsis ω (`arg_peri`, as binary and exoplanet papers
               do), not both; the other is derived. Fields: a, e, i, node, arg_peri,
               long_peri, and m when given; read them as `venus.a`.
    Arguments: a  semi-major axis (length);  e  eccentricity (0 ≤ e < 1);
               i  inclination, node  longitude of the ascending node Ω, long_peri  ϖ,
               arg_peri  ω (angles, default 0);  m  the body's mass or GM (for a perturber)
    Result:    an orbit record
    Validity:  osculating or mean elements, as the source gives them; angles in one frame.
    PPN:       none.
    Source:    Murray & Dermott 1999, Solar System Dynamics, §2.8 (from memory).
    """
    for value, name in ((a, "a"), (e, "e")):
        check.scalar(value, name)
    check.length(a, "a")
    ecc = check.eccentricity(e)
    angles = {}
    for value, name in ((i, "i"), (node, "node"), (long_peri, "long_peri"), (arg_peri, "arg_peri")):
        if value is not None:
            check.scalar(value, name)
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
            quantity(radians * 180 / np.pi, u.deg)

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
        "e": quantity(float(ecc)),
        "i": i_deg,
        "node": node_deg,
        "arg_peri": arg_deg,
        "long_peri": long_deg,
    }
    if m is not None:
        check.scalar(m, "m")
        check.gravitational_parameter(m, "m")
        fields["m"] = m
    return Record("orbit", fields)


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
               §2.9 (Gauss's equations) and §7.2; Burns 1976, Am. J. Phys. 44, 944 (from memory).
    """
    gm = check.gravitational_parameter(M)
    tgt = _target_elements(target)
    pert = _Elements(perturber, "perturber")
    n_t, n_p = _grid(grid)
    rate = _secular_rate(gm, _TargetSample(tgt, n_t), pert, pert.gm("perturber", required=True),
                         n_p)
    return quantity(rate * _CENTURY_S / _ARCSEC, _RATE_UNIT)


def _names(records: list[Record]) -> list[str]:
    names: list[str] = []
    for index, record in enumerate(records, start=1):
        name = record.label or f"perturber_{index}"
        if name in names or name in ("oblateness", "gr", "lense_thirring", "total"):
            name = f"perturber_{index}"
        names.append(name)
    return names


@register("periapsis_budget", TOPIC, samplewise=True)
def periapsis_budget(M: Mass, target: Orbit, perturbers: Orbits, J2: Dimensionless | None = None,
                     R: Length | None = None, J: AngularMomentum | None = None,
                     gamma: Dimensionless | None = None, beta: Dimensionless | None = None,
                     grid: Dimensionless | None = None) -> Budget:
    """Everything that moves a periapsis, term by term: perturbers, oblateness, GR, Lense–Thirring.

    Formula:   one field per perturber (`perturbation_rate`, named after the cell holding its
               orbit), `oblateness` (`oblateness_rate`, when J2 and R are given), `gr`
               (`periapsis_rate`, with the sheet's PPN values), `lense_thirring`
               (2 G J (1 − 3 cos i) / (c² a³ (1 − e²)^(3/2)), when J is given) and `total`
    Arguments: M  central mass or GM;  target  orbit record;  perturbers  an array of orbit
               records with masses;  J2, R  the central body's oblateness and its reference
               radius;  J  its spin angular momentum;  gamma, beta  PPN (default: sheet, else 1);
               grid  as for perturbation_rate
    Result:    a periapsis budget record, every field in arcsec / century
    Validity:  each term's own (first order in each small parameter, secular); the terms add
               to first order. The target's inclination serves for J2 and Lense–Thirring, so it
               should be measured from the central body's equator for those terms.
    PPN:       the `gr` term carries (2 + 2γ − β)/3; the others none (LT: GR value).
    Source:    Clemence 1947, Rev. Mod. Phys. 19, 361 (Mercury: 531.5″/century from the planets,
               from memory); Will 2014, Living Rev. Relativ. 17, 4; Lense & Thirring 1918.
    """
    from .orbits import periapsis_rate

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
    for name, record in zip(_names(items), items):
        pert = _Elements(record, "perturbers")
        rate = _secular_rate(gm, sampled, pert, pert.gm("perturbers", required=True), n_p)
        fields[name] = quantity(rate * _CENTURY_S / _ARCSEC, _RATE_UNIT)
        total += rate
    if (J2 is None) != (R is None):
        raise ArgumentError("give both `J2` and `R` for the oblateness term", "J2" if R is None else "R")
    if J2 is not None:
        node, argument = j2_rates(gm, check.dimensionless(J2, "J2"), check.length(R, "R"),
                                  tgt.a, tgt.e, tgt.i)
        fields["oblateness"] = quantity((node + argument) * _CENTURY_S / _ARCSEC, _RATE_UNIT)
        total += node + argument
    fields["gr"] = periapsis_rate(M, target.fields["a"], target.fields["e"], gamma, beta)
    total += fields["gr"].to_value(_RATE_UNIT) * _ARCSEC / _CENTURY_S
    if J is not None:
        spin = check.angular_momentum(J)
        c = check.speed_of_light()
        G = check.active("G").to_value(u.m**3 / (u.kg * u.s**2))
        lt = 2 * G * spin * (1 - 3 * np.cos(tgt.i)) / (c**2 * tgt.a**3 * (1 - tgt.e**2) ** 1.5)
        fields["lense_thirring"] = quantity(lt * _CENTURY_S / _ARCSEC, _RATE_UNIT)
        total += lt
    fields["total"] = quantity(total * _CENTURY_S / _ARCSEC, _RATE_UNIT)
    return Record("periapsis budget", fields)
