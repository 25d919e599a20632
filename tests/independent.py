"""Independent computations the function tests compare with: numerical integrals of the metric
and of the equations of motion (scipy.integrate), never the closed forms calc/ uses.

Each helper names what it integrates; the closed forms are limits of these integrals, so a test
that compares the two checks the formula, its factors and its γ dependence from the metric up.
"""

from __future__ import annotations

import math

import numpy as np
from scipy.integrate import quad

C = 299_792_458.0        # m/s, exact (SI 2019)
GM_SUN = 1.3271244e20    # m^3/s^2, IAU 2015 Resolution B3 nominal solar mass parameter
AU = 149_597_870_700.0   # m, IAU 2012 Resolution B2


def schwarzschild_light_bending(gm: float, closest_approach: float) -> float:
    """Total deflection (rad) of a light ray in the Schwarzschild metric, by quadrature.

    The null geodesic's orbit equation (du/dφ)² = 1/b² − u² + r_s u³ (Misner, Thorne & Wheeler
    1973, §25.6, from memory; any GR text) gives, with x = r0/r and ε = r_s/r0,
    α + π = 2 ∫₀¹ dx / √((1 − x)[(1 + x) − ε(1 + x + x²)]).
    The flat-space part, 2∫₀¹ dx/√(1 − x²) = π, is taken out in closed form with expm1/log1p so
    that a deflection of 1e-11 rad keeps its digits. Exact in GM/(c² b), not first order.
    """
    eps = 2 * gm / C**2 / closest_approach

    def excess(x: float) -> float:
        # (1+x)^-1/2 [ (1 - ε(1+x+x²)/(1+x))^-1/2 − 1 ]; the (1−x)^-1/2 goes in quad's weight
        ratio = eps * (1 + x + x * x) / (1 + x)
        return math.expm1(-0.5 * math.log1p(-ratio)) / math.sqrt(1 + x)

    value, _ = quad(excess, 0.0, 1.0, weight="alg", wvar=(0.0, -0.5), epsabs=0, epsrel=1e-13)
    return 2 * value


def impact_parameter_of(gm: float, closest_approach: float) -> float:
    """b = r0 / √(1 − r_s/r0) for a Schwarzschild null geodesic (b = L/E)."""
    return closest_approach / math.sqrt(1 - 2 * gm / C**2 / closest_approach)


def ppn_refractive_index(potential, gamma: float):
    """n = √(g_rr / −g_tt) of the PPN metric to first order in U = GM/(c² r):
    g_tt = −(1 − 2U), g_ij = (1 + 2γU) δ_ij (Will 2014, Living Rev. Relativ. 17, 4, the PPN
    metric; from memory). Light moves through it as through a medium of this index."""
    return np.sqrt((1 + 2 * gamma * potential) / (1 - 2 * potential))


def ppn_bending(gm: float, b: float, gamma: float) -> float:
    """Deflection (rad) of a ray at impact parameter b: the transverse gradient of the PPN
    refractive index integrated along the straight line (eikonal, first order), by quadrature
    (not the closed form (1 + γ) 2GM/(c² b)); agrees with it to O(GM/(c² b))."""
    m = gm / C**2

    def gradient(theta: float) -> float:
        # along the ray z = b tan θ, r = b / cos θ, dz = b dθ / cos² θ (a smooth integrand)
        r = b / math.cos(theta)
        # dn/dr by a complex step (Squire & Trapp 1998, SIAM Rev. 40, 110): no subtraction,
        # so exact to rounding, and no closed-form derivative that would restate (1 + γ)
        h = 1e-20 * r
        dn_dr = ppn_refractive_index(m / complex(r, h), gamma).imag / h
        return -dn_dr * (b / r) * b / math.cos(theta) ** 2

    value, _ = quad(gradient, 0.0, math.pi / 2, epsabs=0, epsrel=1e-10, limit=200)
    return 2 * value


def ppn_light_time_excess(gm: float, b: float, before: float, after: float, gamma: float) -> float:
    """One-way delay (s) along the straight ray from z = −before to z = +after (z measured from
    the closest approach b): ∫ (n − 1) dz / c with the PPN index, by quadrature."""
    m = gm / C**2

    def excess(theta: float) -> float:
        r = b / math.cos(theta)   # z = b tan θ as above
        # n − 1 through log1p/expm1: it is 1e-8 far out, where sqrt(...) − 1 loses half its digits
        u_ = m / r
        n_minus_1 = math.expm1(0.5 * (math.log1p(2 * gamma * u_) - math.log1p(-2 * u_)))
        return n_minus_1 * b / math.cos(theta) ** 2

    total = 0.0
    for end in (before, after):
        value, _ = quad(excess, 0.0, math.atan2(end, b), epsabs=0, epsrel=1e-10, limit=400)
        total += value
    return total / C


def newtonian_hyperbola_turn(gm: float, b: float, v_inf: float) -> float:
    """Turning angle (rad) of a Newtonian hyperbolic orbit with speed v_inf at infinity and
    impact parameter b, from the orbit equation integrated by quadrature: the angle swept from
    infinity to periapsis and back, φ = 2 ∫_{r_p}^∞ (L/r²) dr / √(2(E + GM/r) − L²/r²)."""
    energy = v_inf**2 / 2
    angular = b * v_inf
    # periapsis: 2(E + GM/r) = L²/r², a quadratic in 1/r
    inv_rp = (gm + math.sqrt(gm**2 + 2 * energy * angular**2)) / angular**2

    # in w = 1/r: φ/2 = ∫₀^{w_p} L dw / √(2E + 2GM w − L² w²), roots w_p and w_m < 0
    inv_rm = (gm - math.sqrt(gm**2 + 2 * energy * angular**2)) / angular**2

    def integrand(w: float) -> float:
        return 1 / math.sqrt(w - inv_rm)

    value, _ = quad(integrand, 0.0, inv_rp, weight="alg", wvar=(0.0, -0.5), epsabs=0, epsrel=1e-13)
    # the weight supplies (w_p − w)^-1/2; L²(w_p − w)(w − w_m) = 2E + 2GMw − L²w²
    return 2 * value - math.pi




def einstein_ring_angle(gm: float, d_lens: float, d_source: float, bending) -> float:
    """The ring of a source straight behind a point lens (beta = 0): the angle theta at which the
    thin-lens equation theta D_s = alpha(D_l theta) (D_s - D_l) holds (Schneider, Ehlers & Falco
    1992, ch. 2, from memory), with alpha = bending(gm, b) (one of the integrals above) and the
    root found by brentq."""
    from scipy.optimize import brentq

    def mismatch(theta: float) -> float:
        return theta * d_source - bending(gm, d_lens * theta) * (d_source - d_lens)

    return brentq(mismatch, 1e-14, 1e-4, xtol=1e-24, rtol=1e-13)
