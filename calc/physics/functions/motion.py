"""Orbits in time: Kepler's equation, positions and velocities at dates, geometry between them.

Dates are astropy `Time` objects in any scale; the two-body solution runs in TDB
seconds (the coordinate time of solar-system dynamics; TT differs from it by at
most 1.7 ms, which moves a planet by millimetres to metres). States are records
with the fields x y z r (AU), vx vy vz v (km/s), true_anomaly (deg, orbit states
only) and t (the dates), in the frame of the orbit's elements: the reference plane
and direction the node and inclination are measured from.

Kepler's equation is solved on whole arrays: the mean anomaly is reduced to
[−π, π], Danby's starter E0 = M + 0.85 e sign(sin M) is refined with Halley's
third-order step until every element has converged, and the whole turns are added
back, so E runs on continuously over many orbits.
"""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING, Annotated

import astropy.units as u
import numpy as np

from ...errors import ArgumentError, DomainError
from ..records import Record, is_date
from ..units import close_matches, did_you_mean, quantity
from . import args as check
from . import register
from .args import Angle, Date, Dimensionless, Length, Mass

if TYPE_CHECKING:  # astropy.time loads only when a sheet has dates
    from astropy.time import Time as AstropyTime

TOPIC = "motion"

Orbit = Annotated[Record, "orbit record"]
State = Annotated[Record, "state record"]
Body = Annotated[str, "a body's name in quotes"]
Origin = Annotated[str, '"ssb", "sun" or "earth"']

_TWO_PI = 2 * np.pi
_AU = 149_597_870_700.0          # m, IAU 2012 Resolution B2 (exact)
_DAY = 86400.0
#: Halley's step shrinks the error cubically: once every step is below this, the
#: error left is far below rounding, so the loop stops.
_KEPLER_STEP = 1e-12
_KEPLER_MAX_ITERATIONS = 60


def solve_kepler(mean_anomaly, e):
    """Eccentric anomaly E (rad) with M = E − e sin E, for arrays of M (rad) and 0 ≤ e < 1.

    E keeps M's whole turns (E − M stays within ±e), so it is continuous in M.
    """
    M = np.asarray(mean_anomaly, dtype=float)
    ecc = np.asarray(e, dtype=float)
    turns = np.round(M / _TWO_PI)
    reduced = M - turns * _TWO_PI                       # in [−π, π]
    # Danby (1987) starter: within the region where Newton and Halley converge for all e < 1
    E = reduced + 0.85 * ecc * np.sign(reduced)
    for _ in range(_KEPLER_MAX_ITERATIONS):
        sin_e, cos_e = np.sin(E), np.cos(E)
        f = E - ecc * sin_e - reduced
        f1 = 1 - ecc * cos_e
        f2 = ecc * sin_e
        step = f / (f1 - 0.5 * f * f2 / f1)
        E = E - step
        if not np.any(np.abs(step) > _KEPLER_STEP):   # also stops on NaN (none get here)
            break
    return E + turns * _TWO_PI


def true_from_eccentric(E, e):
    """True anomaly f from E, continuous with it: f = E + 2 atan2(β sin E, 1 − β cos E),
    β = e / (1 + √(1 − e²)) (no quadrant ambiguity, no tan(E/2) pole)."""
    beta = e / (1 + np.sqrt(1 - e * e))
    return E + 2 * np.arctan2(beta * np.sin(E), 1 - beta * np.cos(E))


@register("kepler", TOPIC)
def kepler(mean_anomaly: Angle, e: Dimensionless) -> Angle:
    """Eccentric anomaly E from Kepler's equation M = E − e sin E (elliptic orbits).

    Formula:   M = E − e sin E, solved for E: M reduced to [−π, π], Danby's starter
               E0 = M + 0.85 e sign(M), Halley steps E ← E − f/(f′ − f f″/(2f′)) with
               f = E − e sin E − M until every element has converged; whole turns of M are
               kept in E (E − M lies within ±e).
    Arguments: mean_anomaly  M (angle; arrays allowed);  e  eccentricity (0 ≤ e < 1; arrays
               broadcast against M)
    Result:    angle, in the unit of `mean_anomaly` (rad for a plain number)
    Validity:  exact to rounding: within 1e−14 rad of the root for |M| ≤ π and e ≤ 0.99;
               beyond, the float rounding of M itself (about 1e−16 |M|) is amplified by
               dE/dM = 1/(1 − e cos E), up to 100 near periapsis at e = 0.99.
    PPN:       none (Newtonian two-body problem).
    Source:    Danby 1988, Fundamentals of Celestial Mechanics, 2nd ed., §6.6 (starter
               k = 0.85, from memory); Murray & Dermott 1999, Solar System Dynamics,
               eq. (2.52) (from memory: a book not available here). Checked against
               scipy.optimize.brentq and against Meeus 1998, Astronomical Algorithms, 2nd ed.,
               Example 30.a (from memory: a book not available here).
    """
    ecc = _eccentricity_array(e)
    if mean_anomaly.unit.physical_type == "angle":
        unit = mean_anomaly.unit
    else:
        unit = u.rad
    M = check.angle(mean_anomaly, "mean_anomaly")
    if not np.all(np.isfinite(M)):
        raise ArgumentError(f"`mean_anomaly` must be finite, got {check.show(mean_anomaly)}",
                            "mean_anomaly")
    E = solve_kepler(M, ecc)
    return quantity(E * u.rad.to(unit), unit)


def _eccentricity_array(e: u.Quantity, name: str = "e"):
    value = check.dimensionless(e, name)
    if not np.all(np.isfinite(value)) or check.any_below(value, 0) or \
            not np.all(np.asarray(value) < 1):
        raise ArgumentError(f"`{name}` must be at least 0 and below 1 (an elliptic orbit), "
                            f"got {check.show(e)}", name)
    return value


# ---- states from orbit records ------------------------------------------------------


class _TimedOrbit:
    """An orbit record's elements in SI and radians, arrays allowed, and its time origin."""

    def __init__(self, record, name: str) -> None:
        if not isinstance(record, Record) or record.kind != "orbit":
            raise ArgumentError(f"`{name}` must be an orbit record, made with orbit(…)", name)
        f = record.fields
        self.a = f["a"].to_value(u.m)
        self.e = np.asarray(f["e"].to_value(u.dimensionless_unscaled), dtype=float)
        self.i = f["i"].to_value(u.rad)
        self.node = f["node"].to_value(u.rad)
        self.arg = f["arg_peri"].to_value(u.rad)
        self.mass = f.get("m")
        self.label = record.label
        self.name = name
        self.t_peri: AstropyTime | None = f.get("t_peri")
        self.epoch: AstropyTime | None = f.get("epoch")
        anomaly = f.get("mean_anomaly")
        self.mean_anomaly0 = 0.0 if anomaly is None else anomaly.to_value(u.rad)
        if self.t_peri is None and self.epoch is None:
            what = f"`{self.label}`" if self.label else f"`{name}`"
            raise ArgumentError(
                f"{what} has no position in time: give orbit(…, t_peri = DATE) or "
                "orbit(…, mean_anomaly = ANGLE, epoch = DATE)", name)

    def mu(self, gm_central):
        """G(M + m): the relative orbit's gravitational parameter (m when the record has it)."""
        if self.mass is None:
            return gm_central
        return gm_central + check.gravitational_parameter(self.mass, self.name)

    def mean_anomaly(self, t: AstropyTime, n):
        """M at dates t (rad), from the time of periapsis or the epoch (TDB seconds)."""
        if self.t_peri is not None:
            return n * check.seconds_between(t, self.t_peri)
        return self.mean_anomaly0 + n * check.seconds_between(t, self.epoch)

    def frame(self):
        """The perifocal unit vectors P (to periapsis) and Q (90° ahead), components first."""
        co, so = np.cos(self.node), np.sin(self.node)
        cw, sw = np.cos(self.arg), np.sin(self.arg)
        ci, si = np.cos(self.i), np.sin(self.i)
        P = (co * cw - so * sw * ci, so * cw + co * sw * ci, sw * si)
        Q = (-co * sw - so * cw * ci, -so * sw + co * cw * ci, cw * si)
        return P, Q


def two_body_state(mu, a, e, E, P, Q):
    """Position (m) and velocity (m/s) components, r, v, from E on a Keplerian ellipse."""
    n = np.sqrt(mu / a**3)
    sin_e, cos_e = np.sin(E), np.cos(E)
    root = np.sqrt(1 - e * e)
    one_minus = 1 - e * cos_e
    xp = a * (cos_e - e)
    yp = a * root * sin_e
    speed_scale = n * a / one_minus
    vxp = -speed_scale * sin_e
    vyp = speed_scale * root * cos_e
    position = tuple(P[k] * xp + Q[k] * yp for k in range(3))
    velocity = tuple(P[k] * vxp + Q[k] * vyp for k in range(3))
    r = a * one_minus
    v = np.sqrt(mu * (2 / r - 1 / a))
    return position, velocity, r, v


def state_record(position, velocity, r, v, t: AstropyTime, true_anomaly=None) -> Record:
    """A state record from SI components (AU and km/s in the record)."""
    fields = {
        "x": quantity(position[0] / _AU, u.AU),
        "y": quantity(position[1] / _AU, u.AU),
        "z": quantity(position[2] / _AU, u.AU),
        "r": quantity(r / _AU, u.AU),
        "vx": quantity(velocity[0] / 1e3, u.km / u.s),
        "vy": quantity(velocity[1] / 1e3, u.km / u.s),
        "vz": quantity(velocity[2] / 1e3, u.km / u.s),
        "v": quantity(v / 1e3, u.km / u.s),
    }
    if true_anomaly is not None:
        fields["true_anomaly"] = quantity(np.degrees(np.mod(true_anomaly, _TWO_PI)), u.deg)
    fields["t"] = t
    return Record("state", fields)


def orbit_phase(M: u.Quantity, orbit: Record, t: AstropyTime, name: str = "orbit"):
    """(elements, μ, n, E) of an orbit record at dates t, after checking the arguments."""
    gm = check.gravitational_parameter(M)
    elements = _TimedOrbit(orbit, name)
    mu = elements.mu(gm)
    n = np.sqrt(mu / elements.a**3)
    E = solve_kepler(elements.mean_anomaly(t, n), elements.e)
    return elements, mu, n, E


@register("orbit_state", TOPIC)
def orbit_state(M: Mass, orbit: Orbit, t: Date) -> State:
    """Position and velocity on a Keplerian orbit at given dates (two-body problem).

    Formula:   n = √(μ/a³) with μ = G(M + m) (m, the body's own mass, when the record
               has it: the relative orbit of the two bodies); mean anomaly
               M(t) = n (t − t_peri) or M0 + n (t − epoch); Kepler's equation for E;
               perifocal x′ = a (cos E − e), y′ = a √(1−e²) sin E,
               ẋ′ = −n a sin E/(1 − e cos E), ẏ′ = n a √(1−e²) cos E/(1 − e cos E);
               rotated by the node Ω, inclination i and argument of periapsis ω:
               P = (cos Ω cos ω − sin Ω sin ω cos i, sin Ω cos ω + cos Ω sin ω cos i, sin ω sin i),
               Q = (−cos Ω sin ω − sin Ω cos ω cos i, −sin Ω sin ω + cos Ω cos ω cos i,
               cos ω sin i); r = a (1 − e cos E); v from vis-viva.
    Arguments: M  mass or GM of the central body;  orbit  an orbit record with t_peri, or
               mean_anomaly and epoch;  t  dates (arrays allowed; elements that are arrays
               broadcast against them)
    Result:    a state record: x y z r (AU), vx vy vz v (km/s), true_anomaly (deg, in
               [0°, 360°)), t (the dates), relative to the central body, in the frame of the
               elements (the reference plane and direction of i and Ω)
    Validity:  Newtonian two-body problem, elliptic orbits; no perturbations, no relativistic
               periapsis advance. Dates are used in TDB (t − t_peri in TDB seconds).
    PPN:       none (Newtonian).
    Source:    Murray & Dermott 1999, Solar System Dynamics, eqs. (2.41)–(2.42), (2.122)
               (from memory: a book not available here); Vallado 2013, Fundamentals of
               Astrodynamics and Applications, 4th ed., Algorithm 10 (COE2RV) (from memory:
               a book not available here).
    """
    dates = check.date(t, "t")
    elements, mu, n, E = orbit_phase(M, orbit, dates)
    P, Q = elements.frame()
    position, velocity, r, v = two_body_state(mu, elements.a, elements.e, E, P, Q)
    anomaly = true_from_eccentric(E, elements.e)
    return state_record(position, velocity, r, v, dates, anomaly)


# ---- geometry between two states ----------------------------------------------------


def _positions(record, name: str):
    """(x, y, z) in metres from a record with x, y, z fields (a state)."""
    if not isinstance(record, Record) or not all(k in record.fields for k in ("x", "y", "z")):
        raise ArgumentError(f"`{name}` must be a state record (with fields x, y, z), made "
                            "with orbit_state(…) or ephemeris(…)", name)
    try:
        return tuple(check.value_in(record.fields[k], u.m) for k in ("x", "y", "z"))
    except u.UnitConversionError:
        raise ArgumentError(f"`{name}`: its x, y, z must be lengths", name) from None


def _same_dates(observer: Record, target: Record) -> None:
    """Refuse two states whose dates differ (by more than 1 µs): their geometry means nothing."""
    t1, t2 = observer.fields.get("t"), target.fields.get("t")
    if not is_date(t1) or not is_date(t2):
        return
    try:
        gap = np.abs(check.seconds_between(t1, t2))
    except ValueError:
        raise ArgumentError("`observer` and `target` have dates of different lengths",
                            "target") from None
    if np.any(gap > 1e-6):
        raise ArgumentError(f"`observer` and `target` are states at different dates (up to "
                            f"{np.max(gap):.6g} s apart): compute both at the same dates",
                            "target")


@register("elongation", TOPIC)
def elongation(observer: State, target: State) -> Angle:
    """Elongation: the angle at the observer between the central body and the target.

    Formula:   with r_o, r_t the positions from the central body, the angle between
               −r_o and r_t − r_o, as atan2(|a × b|, a · b) (accurate at small angles too)
    Arguments: observer, target  state records on the same dates, relative to the same
               central body and in the same axes (from orbit_state or ephemeris)
    Result:    angle, in deg (0° when the target is in front of the central body: a
               conjunction)
    Validity:  geometric (instantaneous) positions: no light time, no aberration.
    PPN:       none.
    Source:    geometry (common practice).
    """
    xo, yo, zo = _positions(observer, "observer")
    xt, yt, zt = _positions(target, "target")
    _same_dates(observer, target)
    ax, ay, az = -xo, -yo, -zo
    bx, by, bz = xt - xo, yt - yo, zt - zo
    cx, cy, cz = ay * bz - az * by, az * bx - ax * bz, ax * by - ay * bx
    angle = np.arctan2(np.sqrt(cx * cx + cy * cy + cz * cz), ax * bx + ay * by + az * bz)
    return quantity(np.degrees(angle), u.deg)


@register("impact_parameter", TOPIC)
def impact_parameter(observer: State, target: State) -> Length:
    """Closest approach to the central body of the straight path between observer and target.

    Formula:   d = r_t − r_o, λ = clip(−r_o · d / |d|², 0, 1), b = |r_o + λ d|: the distance
               from the central body to the segment observer–target. When the closest point
               of the infinite line lies beyond either end, the signal never passes it (the
               central body is behind the observer or beyond the target), so the nearer end
               counts; at a conjunction, where the light-time and deflection formulas need b,
               the closest point lies within the segment and b is the usual impact parameter.
    Arguments: observer, target  state records on the same dates, relative to the same
               central body (from orbit_state or ephemeris)
    Result:    length, in AU
    Validity:  straight-line (undeflected) path between instantaneous positions.
    PPN:       none.
    Source:    geometry (common practice).
    """
    xo, yo, zo = _positions(observer, "observer")
    xt, yt, zt = _positions(target, "target")
    _same_dates(observer, target)
    dx, dy, dz = xt - xo, yt - yo, zt - zo
    length2 = dx * dx + dy * dy + dz * dz
    if np.any(length2 == 0):
        raise ArgumentError("`observer` and `target` are at the same place: no path between "
                            "them", "target")
    lam = np.clip(-(xo * dx + yo * dy + zo * dz) / length2, 0.0, 1.0)
    px, py, pz = xo + lam * dx, yo + lam * dy, zo + lam * dz
    return quantity(np.sqrt(px * px + py * py + pz * pz) / _AU, u.AU)


# ---- solar-system ephemerides --------------------------------------------------------

#: Bodies of the built-in ephemeris (ERFA epv00, plan94, moon98 through astropy).
BUILTIN_BODIES = ("sun", "mercury", "venus", "earth", "moon", "earth-moon-barycenter", "mars",
                  "jupiter", "saturn", "uranus", "neptune")
ORIGINS = ("ssb", "sun", "earth")
_ALIASES = {"emb": "earth-moon-barycenter", "earth-moon-barycentre": "earth-moon-barycenter",
            "ssb": "ssb", "solar-system-barycenter": "ssb", "solar-system-barycentre": "ssb"}
#: NAIF integer codes of a body, the body itself first, its system barycentre as a fallback
#: (a kernel such as de440s has Mars' barycentre 4 but not Mars 499).
_NAIF = {"ssb": (0,), "sun": (10,), "mercury": (199, 1), "venus": (299, 2), "earth": (399,),
         "moon": (301,), "earth-moon-barycenter": (3,), "mars": (499, 4), "jupiter": (599, 5),
         "saturn": (699, 6), "uranus": (799, 7), "neptune": (899, 8), "pluto": (999, 9)}


def _body_name(body, name: str, known: tuple[str, ...]) -> str:
    if not isinstance(body, str):
        raise ArgumentError(f"`{name}` must be a body's name in quotes, such as \"mars\"", name)
    key = body.strip().lower().replace(" ", "-").replace("_", "-")
    key = _ALIASES.get(key, key)
    if key not in known:
        hint = did_you_mean(close_matches(key, list(known)))
        raise ArgumentError(f"`{name}`: no body called \"{body}\" in this ephemeris"
                            + (f"; {hint}" if hint else f"; it knows {', '.join(known)}"),
                            name)
    return key


@register("ephemeris", TOPIC)
def ephemeris(body: Body, t: Date, origin: Origin = "ssb") -> State:
    """Position and velocity of a solar-system body at given dates, from an ephemeris.

    Formula:   barycentric state of `body` minus that of `origin`, ICRS axes. The source is
               the sheet's `ephemeris "FILE.bsp"` statement (a JPL SPK kernel, read with
               jplephem; Chebyshev segments chained from the body to the solar-system
               barycentre) or, without one, astropy's built-in ephemeris (ERFA epv00 for
               the Earth and the Sun, plan94 for the planets, moon98 for the Moon).
    Arguments: body  "sun", "mercury", "venus", "earth", "moon", "emb", "mars", "jupiter",
               "saturn", "uranus", "neptune" (and "pluto" from a kernel);  t  dates (arrays
               allowed);  origin  "ssb" (default), "sun" or "earth"
    Result:    a state record: x y z r (AU), vx vy vz v (km/s), t; no true anomaly (an
               ephemeris is not a two-body orbit)
    Validity:  built-in: the Earth to 4.6 km rms (13.4 km max) against DE405 over 1900–2100
               (epv00), planets to hundreds to hundreds of thousands of km (plan94, Mars
               ~7700 km rms, Jupiter ~72000 km), meant for planning, not navigation; plan94
               axes are the mean J2000 equator and equinox (23 mas from ICRS). A kernel is as
               good as the kernel, within its date range. Geometric positions (no light
               time), dates in TDB.
    PPN:       none here (the ephemerides themselves are relativistic fits, in TDB).
    Source:    ERFA/SOFA documentation of epv00 and plan94 (accuracy notes); Simon et al.
               1994, A&A 282, 663 (plan94); JPL SPK format via jplephem.
    """
    from ..environment import current

    dates = check.date(t, "t")
    path = current().ephemeris
    if path is None:
        target = _body_name(body, "body", BUILTIN_BODIES)
        centre = _body_name(origin, "origin", ORIGINS)
        position, velocity = _builtin_state(target, dates)
        if centre != "ssb":
            p0, v0 = _builtin_state(centre, dates)
            position, velocity = position - p0, velocity - v0
    else:
        position, velocity = _kernel_state(Path(path), body, origin, dates)
    r = np.sqrt(np.sum(position * position, axis=0))
    v = np.sqrt(np.sum(velocity * velocity, axis=0))
    return state_record(position, velocity, r, v, dates)


def _builtin_state(body: str, t: AstropyTime):
    """(position m, velocity m/s) arrays of shape (3, …) from astropy's built-in ephemeris."""
    from astropy.coordinates import get_body_barycentric_posvel

    pos, vel = get_body_barycentric_posvel(body, t, ephemeris="builtin")
    return pos.xyz.to_value(u.m), vel.xyz.to_value(u.m / u.s)


def _kernel_state(path: Path, body, origin, t: AstropyTime):
    try:
        from jplephem.spk import SPK
    except ImportError:
        raise DomainError("reading a JPL kernel needs the jplephem package "
                          "(pip install jplephem)") from None
    if not path.is_file():
        raise DomainError(f"the ephemeris kernel {path} does not exist (no kernel is "
                          "downloaded: put the .bsp file there, or remove the `ephemeris` "
                          "statement to use the built-in ephemeris)")
    try:
        kernel = SPK.open(str(path))
    except (OSError, ValueError) as exc:
        raise DomainError(f"the ephemeris kernel {path} cannot be read as a JPL SPK file "
                          f"({exc})") from None
    try:
        available = {target for (_, target) in kernel.pairs}
        known = tuple(k for k, codes in _NAIF.items()
                      if k == "ssb" or any(c in available for c in codes))
        target = _body_name(body, "body", tuple(k for k in known if k != "ssb"))
        centre = _body_name(origin, "origin", tuple(k for k in ORIGINS if k in known))
        jd = t.tdb
        jd1, jd2 = np.ravel(jd.jd1), np.ravel(jd.jd2)
        position, velocity = _chain(kernel, target, jd1, jd2, path)
        if centre != "ssb":
            p0, v0 = _chain(kernel, centre, jd1, jd2, path)
            position, velocity = position - p0, velocity - v0
    finally:
        kernel.close()
    shape = (3,) + t.shape
    # jplephem gives km and km/day
    return (position * 1e3).reshape(shape), (velocity * 1e3 / _DAY).reshape(shape)


def _chain(kernel, name: str, jd1, jd2, path: Path):
    """Sum the segments from the body down to the solar-system barycentre (code 0)."""
    from jplephem.exceptions import OutOfRangeError

    by_target: dict[int, int] = {}
    for centre, target in kernel.pairs:
        by_target.setdefault(target, centre)
    code = next(c for c in _NAIF[name] if c in by_target)
    position = np.zeros((3, jd1.size))
    velocity = np.zeros((3, jd1.size))
    seen = set()
    while code != 0:
        if code not in by_target or code in seen:
            raise DomainError(f"the kernel {path} does not link \"{name}\" to the "
                              "solar-system barycentre")
        seen.add(code)
        centre = by_target[code]
        segment = kernel[centre, code]
        try:
            p, v = segment.compute_and_differentiate(jd1, jd2)
        except OutOfRangeError:
            from astropy.time import Time as AstropyTime

            first = AstropyTime(segment.start_jd, format="jd", scale="tdb").iso[:10]
            last = AstropyTime(segment.end_jd, format="jd", scale="tdb").iso[:10]
            raise DomainError(f"a date lies outside the kernel {path.name}, which covers "
                              f"{first} to {last} (TDB)") from None
        position += np.reshape(p, (3, -1))
        velocity += np.reshape(v, (3, -1))
        code = centre
    return position, velocity
