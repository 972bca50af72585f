"""The warm theory against roots computed here, outside streamsim.theory and streamsim.validation.

Each reference below is a few lines of numpy/scipy written from the definition of the 1D
relativistic electrostatic dielectric function (e.g. Krall & Trivelpiece 1973, ch. 8):

    eps(k, omega) = 1 + sum_s (omega_ps^2 / k) Int f_s'(u) / (omega - k v(u)) du,  v = u/sqrt(1+u^2),

with f_s normalised to 1 in u. For Im omega > 0 the integrand has no pole on the real u axis, so
adaptive quadrature (scipy.integrate.quad) gives eps exactly; the secant method finds the zero.
"""
from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate, optimize, special

from streamsim import theory
from streamsim.deck import Species
from streamsim.validation import references


def _sp(name, charge, density, u, *, theta=0.0, spread=0.0):
    dist = "waterbag" if spread > 0 else ("juttner" if theta > 0 else "cold")
    return Species(name=name, charge=charge, mass=1.0, density=density, drift_u=u, theta=theta,
                   distribution=dist, spread_u=spread, particles_per_cell=1, loading="quiet")


class _Juttner:
    """Lab-frame drifting 1D Maxwell-Juttner f(u) ∝ exp(-G_d (gamma - b_d u)/theta) (Juttner 1911,
    boosted: the phase-space density is invariant), normalised here by quadrature, integrated in
    rapidity u = sinh(eta) where it is smooth and compact."""

    def __init__(self, wp2, u_d, theta):
        self.wp2, self.theta = wp2, theta
        self.g, self.b = math.sqrt(1 + u_d * u_d), u_d / math.sqrt(1 + u_d * u_d)
        self.eta_d = math.asinh(u_d)
        half = math.acosh(1 + 60 * theta)               # exp(-60) of the peak at the ends
        self.lo, self.hi = self.eta_d - half, self.eta_d + half
        self.norm = 1.0
        self.norm = integrate.quad(lambda e: self.f(math.sinh(e)) * math.cosh(e), self.lo,
                                   self.hi, epsabs=0, epsrel=1e-13, limit=200)[0]

    def f(self, u):
        return math.exp(-(self.g * (math.sqrt(1 + u * u) - self.b * u) - 1) / self.theta) / self.norm

    def chi(self, k, w):
        def integrand(e):
            u, v = math.sinh(e), math.tanh(e)
            return -(self.g / self.theta) * (v - self.b) * self.f(u) * math.cosh(e) / (w - k * v)
        kw = dict(points=[self.eta_d], limit=400, epsabs=1e-13, epsrel=1e-11)
        re = integrate.quad(lambda e: integrand(e).real, self.lo, self.hi, **kw)[0]
        im = integrate.quad(lambda e: integrand(e).imag, self.lo, self.hi, **kw)[0]
        return self.wp2 / k * complex(re, im)


def _quadrature_root(k, beams, guess):
    """Zero of eps(k, omega) = 1 + sum chi by the secant method (scipy.optimize.newton, complex),
    from ``guess``."""
    def eps(w):
        return 1 + sum(b.chi(k, w) for b in beams)
    w = complex(optimize.newton(eps, complex(guess), x1=complex(guess) * (1 + 1e-3) + 1e-4j,
                                tol=1e-13, maxiter=100))
    assert abs(eps(w)) < 1e-9
    return w


def _cold_quartic_roots(k, beams):
    """Roots of 1 = sum wp2/(g^3 (omega - k v)^2) for cold beams (wp2, u) (the cold limit of eps
    above, f = delta(u - u0): longitudinal mass g^3 m), by numpy.roots on the cleared polynomial."""
    P = np.polynomial.Polynomial
    den = [P([-k * u / math.sqrt(1 + u * u), 1.0]) ** 2 for _, u in beams]
    poly = P([1.0])
    for d in den:
        poly = poly * d
    for i, (wp2, u) in enumerate(beams):
        rest = P([1.0])
        for j, d in enumerate(den):
            if j != i:
                rest = rest * d
        poly = poly - wp2 / (1 + u * u) ** 1.5 * rest
    return poly.roots()


def _fastest(roots):
    return complex(roots[np.argmax(np.asarray(roots).imag)])


# --------------------------------------------------------------------------------------------
# Juttner: symmetric and asymmetric warm pairs at one k (fast: this is the default-suite root)
# --------------------------------------------------------------------------------------------
@pytest.mark.parametrize("u_e, u_p, th_e, th_p, n_e, k", [
    (0.5, -0.5, 0.02, 0.02, 0.5, 0.5),          # symmetric warm pair (purely growing root)
    (0.8, -0.3, 0.05, 0.01, 0.6, 0.45),         # asymmetric: a propagating growing root
])
def test_juttner_root_against_independent_quadrature(u_e, u_p, th_e, th_p, n_e, k):
    """streamsim.theory's Juttner growing root equals the zero of the quadrature eps above,
    started from the cold quartic root; agreement to 1e-7 (both are converged to ~1e-12: the
    bound is the root-finder tolerances, not physics)."""
    sp = [_sp("e", -1.0, n_e, u_e, theta=th_e), _sp("p", 1.0, 1 - n_e, u_p, theta=th_p)]
    beams = [_Juttner(n_e, u_e, th_e), _Juttner(1 - n_e, u_p, th_p)]
    cold = _fastest(_cold_quartic_roots(k, [(n_e, u_e), (1 - n_e, u_p)]))
    ref = _quadrature_root(k, beams, cold)
    assert ref.imag > 0.01                      # a genuinely growing warm root
    assert abs(ref - cold) > 1e-3               # and the temperature moved it off the cold root
    g, wr = theory.growth_curve(sp, [k])
    assert theory.model_for_species(sp) == "juttner"
    assert g[0] == pytest.approx(ref.imag, rel=1e-7)
    assert abs(wr[0]) == pytest.approx(abs(ref.real), abs=1e-7)
    w = theory.juttner_growing_root(k, sp)
    assert abs(w - complex(abs(ref.real), ref.imag)) < 1e-7 or abs(w - ref) < 1e-7


def test_references_juttner_growth_against_independent_quadrature():
    """validation/references.py's symmetric Juttner growth (on the imaginary axis) beyond its cold
    limit: theta = 0.05, u = +-0.5, against the complex quadrature root of this file."""
    k, u, th = 0.5, 0.5, 0.05
    beams = [_Juttner(0.5, u, th), _Juttner(0.5, -u, th)]
    cold = _fastest(_cold_quartic_roots(k, [(0.5, u), (0.5, -u)]))
    ref = _quadrature_root(k, beams, cold)
    assert abs(ref.real) < 1e-9 and ref.imag < 0.9 * cold.imag    # purely growing, slowed by theta
    g = references.symmetric_juttner_growth(k, 0.5, u, th, upper=1.0)
    assert g == pytest.approx(ref.imag, rel=1e-8)


def test_references_juttner_tends_to_the_maxwellian_two_stream():
    """theta = 1e-4, u = +-0.02 (v_th = 1e-2, nonrelativistic): references' Juttner growth equals the
    Maxwellian two-stream root from the Faddeeva function, eps = 1 + sum (wp^2/(k v_t)^2)
    (1 + zeta Z(zeta)), Z = i sqrt(pi) w(zeta) (Fried & Conte 1961; scipy.special.wofz), to the
    relativistic correction O(u^2, theta) (from memory: the Juttner -> Maxwellian limit); measured
    -4.9e-4 relative, checked to 1.5e-3."""
    u, th = 0.02, 1e-4
    vt, k = math.sqrt(th), 0.6 * math.sqrt(0.5) / u      # k v0 = 0.6 omega_b

    def eps(g):
        w = 1j * g
        e = 1.0
        for v in (u, -u):
            z = (w - k * v) / (math.sqrt(2) * k * vt)
            e += 0.5 / (k * vt) ** 2 * (1 + z * 1j * math.sqrt(math.pi) * special.wofz(z))
        return e.real
    gm = optimize.brentq(eps, 1e-4, 1.0, xtol=1e-14)
    g = references.symmetric_juttner_growth(k, 0.5, u, th, upper=1.0)
    assert gm > 0.05
    assert g == pytest.approx(gm, rel=1.5e-3)


# --------------------------------------------------------------------------------------------
# Waterbag: the algebraic dispersion relation, written here
# --------------------------------------------------------------------------------------------
def test_waterbag_root_against_the_algebraic_relation():
    """A waterbag flat in u on [u-, u+] (height 1/(u+ - u-)) has f' = (delta(u - u-) - delta(u - u+))
    /(u+ - u-), so eps = 1 - sum wp^2 (v+ - v-)/((u+ - u-)(omega - k v-)(omega - k v+)) (Berk,
    Nielsen & Roberts 1970): a polynomial, solved here by numpy.roots. The lab edges are the
    Lorentz boosts of +-Delta (special relativity, u = G (u' + b sqrt(1 + u'^2)))."""
    k = 0.6
    specs = [(-1.0, 0.6, 0.7, 0.15), (1.0, 0.4, -0.4, 0.3)]    # charge, density, drift u, Delta
    P = np.polynomial.Polynomial
    terms = []
    for _, n, ud, d in specs:
        g, b = math.sqrt(1 + ud * ud), ud / math.sqrt(1 + ud * ud)
        um = g * (-d + b * math.sqrt(1 + d * d))
        up = g * (d + b * math.sqrt(1 + d * d))
        vm, vp = um / math.sqrt(1 + um * um), up / math.sqrt(1 + up * up)
        terms.append((n * (vp - vm) / (up - um), P([-k * vm, 1.0]) * P([-k * vp, 1.0])))
    poly = P([1.0])
    for _, den in terms:
        poly = poly * den
    for i, (c, _) in enumerate(terms):
        rest = P([1.0])
        for j, (_, den) in enumerate(terms):
            if j != i:
                rest = rest * den
        poly = poly - c * rest
    ref = _fastest(poly.roots())
    assert ref.imag > 0.05
    sp = [_sp(f"s{i}", q, n, ud, spread=d) for i, (q, n, ud, d) in enumerate(specs)]
    assert theory.model_for_species(sp) == "waterbag"
    g, wr = theory.growth_curve(sp, [k])
    assert g[0] == pytest.approx(ref.imag, rel=1e-9)
    assert abs(wr[0]) == pytest.approx(abs(ref.real), abs=1e-9)
